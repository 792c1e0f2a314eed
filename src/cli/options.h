// Command-line options shared by the commands, parsed with Boost.Program_options.
#pragma once

#include <boost/program_options.hpp>

#include <cstdint>           // std::int64_t, std::uint64_t
#include <initializer_list>  // std::initializer_list
#include <ostream>           // std::ostream
#include <string>   // std::string
#include <vector>   // std::vector

#include "pare/io.h"

namespace pare::cli {

namespace po = boost::program_options;

/// Options every command takes.
struct CommonOptions {
  std::string out = ".";
  int threads = 0;
  std::uint64_t seed = 1;
  bool quiet = false;
};

/// Options of the commands that read a data file.
struct InputOptions {
  std::string data;
  std::string layout = "rows=samples";
  std::string delimiter;
  std::string label;
  std::string labels;
  std::string na;
  bool na_given = false;
  bool allow_inf = false;
  std::string memory;     ///< --memory SIZE, empty for no budget
  std::string cache_dir;  ///< --cache-dir
};

/// Parses a size such as 500M, 2G, 1.5GiB or 800000000 (bytes; K, M, G, T are powers of 1024).
std::int64_t parse_size(const std::string& text, const char* option);

void add_common_options(po::options_description& desc, CommonOptions& common,
                        const std::string& default_out);
void add_input_options(po::options_description& desc, InputOptions& input);

/// Parses `args` (the words after the command name). On --help prints the help to `out` and
/// returns false. Throws Error(kUsage) on an unknown option or a bad value. `values`, when given,
/// receives the parsed map (to tell given options from defaults).
bool parse_command_line(const std::vector<std::string>& args, const po::options_description& desc,
                        const po::positional_options_description& positional, std::ostream& out,
                        po::variables_map* values = nullptr);

/// The positional arguments `names`, one each, in order (e.g. {"data"} or {"plan", "data"}).
po::positional_options_description positionals(std::initializer_list<const char*> names);

/// Checks and converts the shared options: --threads >= 1 when given, --layout, --delimiter, --na,
/// and that --label and --labels are not both given.
ReadOptions read_options_from(const InputOptions& input, const CommonOptions& common);

/// Throws Error(kInput), naming the file the labels came from, when they hold fewer than 2 classes.
void require_two_classes(const FeatureTable& table, const InputOptions& input);

/// Reads the data file and attaches labels from --labels when given.
FeatureTable load_table(const InputOptions& input, const CommonOptions& common);

}  // namespace pare::cli
