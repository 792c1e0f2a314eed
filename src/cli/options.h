// Command-line options shared by the commands, parsed with Boost.Program_options.
#pragma once

#include <boost/program_options.hpp>

#include <cstdint>      // std::int64_t, std::uint64_t
#include <ostream>      // std::ostream
#include <string>       // std::string
#include <string_view>  // std::string_view
#include <utility>      // std::pair
#include <vector>       // std::vector

#include "pare/io.h"
#include "pare/load.h"

namespace pare::cli {

namespace po = boost::program_options;

/// Options every command takes.
struct CommonOptions {
  std::string out = ".";
  int threads = 0;
  std::uint64_t seed = 1;           ///< set through --seed (0 or more)
  bool quiet = false;
};

/// Options of the commands that read a data file.
struct InputOptions {
  std::string data;
  std::string layout = "rows=samples";
  std::string delimiter;
  std::string label;
  std::string labels;
  std::string target;   ///< --target COLUMN: a continuous target in the data file
  std::string targets;  ///< --targets SHEET[:COLUMN]: a continuous target in a sample sheet
  std::string na;
  bool na_given = false;
  bool allow_inf = false;
  std::string memory;     ///< --memory SIZE, empty for no budget
  std::string cache_dir;  ///< --cache-dir
  std::string samples;    ///< --samples FILE: only these sample ids
  std::string feature_info;  ///< --feature-info COLUMNS (comma-separated)
  std::string sample_info;   ///< --sample-info COLUMNS (comma-separated)
  std::string mark_by;       ///< --mark-by COLUMN (report colours)
  std::int64_t min_class_size = 0;  ///< --min-class-size N (supervised commands)
  bool label_optional = false;      ///< a --label the file lacks means no labels (apply)
  bool info_optional = false;       ///< --feature-info/--sample-info names the file lacks are ignored

  bool has_target() const { return !target.empty() || !targets.empty(); }
  /// Classes or a target to score against were given.
  bool has_response() const { return !label.empty() || !labels.empty() || has_target(); }
  /// The sample sheet given with --labels or --targets, or empty.
  const std::string& sheet() const { return labels.empty() ? targets : labels; }
};

/// Parses a size such as 500M, 2G, 1.5GiB or 800000000 (bytes; K, M, G, T are powers of 1024).
std::int64_t parse_size(const std::string& text, const char* option);

/// `grouped`: the options go under a "general" heading (false for a command with no others).
void add_common_options(po::options_description& desc, CommonOptions& common,
                        const std::string& default_out, bool grouped = true);
void add_input_options(po::options_description& desc, InputOptions& input);

/// The positional arguments of a command, in order: name (for messages) and where its value goes.
using Positionals = std::vector<std::pair<const char*, std::string*>>;

/// Parses `args` (the words after the command name) against `desc` and the positional arguments,
/// each required. Long options must be written in full. On --help prints `desc` to `out` and
/// returns false. Throws Error(kUsage) on an unknown option or a bad value. `values`, when given,
/// receives the parsed map (to tell given options from defaults).
bool parse_command_line(const std::vector<std::string>& args, const po::options_description& desc,
                        const Positionals& positional, std::ostream& out, po::variables_map* values = nullptr);

/// Checks and converts the shared options: --threads >= 1 when given, --layout, --delimiter, --na,
/// and that --label and --labels are not both given.
ReadOptions read_options_from(const InputOptions& input, const CommonOptions& common);

/// The request to load the data of a command: the file, its reading options, labels, sample list,
/// --min-class-size, --mark-by; `supervised` leaves out unlabelled samples and small classes.
DataRequest data_request(const InputOptions& input, const CommonOptions& common, bool supervised, bool hash = true);

/// pare::load_data, printing its warnings (unless quiet).
LoadedData load_data(const DataRequest& request, const CommonOptions& common);

/// Checks the options of InputOptions that need no file: layout, delimiter, --na, --threads,
/// --memory, --min-class-size, and which options go together. Called before any data is read.
void check_input_options(const InputOptions& input, const CommonOptions& common);

/// Library text with its options spelled as the command line spells them (`max_corr` -> --max-corr).
std::string cli_words(std::string_view text);

/// Where warnings go ("pare: warning: ..." lines); set by run() to its error stream.
void set_warning_stream(std::ostream* err);
void warn(const CommonOptions& common, const std::string& what);

/// Adds a --samples / --feature-info / --sample-info / --mark-by / --min-class-size option.
void add_sample_options(po::options_description& desc, InputOptions& input, bool supervised);

}  // namespace pare::cli
