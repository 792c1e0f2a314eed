#include "cli/options.h"

#include <algorithm>   // std::find
#include <cctype>      // std::toupper
#include <cstdlib>     // std::strtod
#include <filesystem>  // std::filesystem::is_directory
#include <string>      // std::stod

#include "pare/error.h"
#include "pare/text.h"

namespace pare::cli {

void add_common_options(po::options_description& desc, CommonOptions& common,
                        const std::string& default_out, bool grouped) {
  common.out = default_out;
  po::options_description group("general", 100, 50);
  po::options_description& to = grouped ? group : desc;
  to.add_options()
      ("out", po::value(&common.out)->default_value(default_out)->value_name("DIR"), "folder for the output files")
      ("threads", po::value(&common.threads)->default_value(0)->value_name("N"),
       "worker threads (0 = all cores); results do not depend on it")
      ("seed", po::value<std::int64_t>()->default_value(1)->value_name("N")->notifier([&common](std::int64_t seed) {
         if (seed < 0) throw_usage_error("--seed must be 0 or more");
         common.seed = static_cast<std::uint64_t>(seed);
       }),
       "seed for anything random")
      ("quiet", po::bool_switch(&common.quiet), "print nothing but errors")
      ("raw-names", po::bool_switch()->notifier([](bool raw) { set_formula_guard(!raw); }),
       "write names exactly, even one a spreadsheet would run as a formula (by default a name "
       "starting with = + - @ is written with a leading ', which pare removes when reading)")
      ("help", "show this help");
  if (grouped) desc.add(group);
}

void add_input_options(po::options_description& desc, InputOptions& input) {
  po::options_description group("reading the data", 100, 50);
  group.add_options()
      ("layout", po::value(&input.layout)->value_name("LAYOUT"),
       "rows=samples (a sample per line; the default) or rows=features (a feature per line)")
      ("delimiter", po::value(&input.delimiter)->value_name("D"),
       "field separator: comma, tab or semicolon (default: detected from the header)")
      ("label", po::value(&input.label)->value_name("COLUMN"),
       "column (rows=samples) or line (rows=features) holding the class labels")
      ("labels", po::value(&input.labels)->value_name("SHEET[:COLUMN]"),
       "sample sheet: sample ids, then labels in COLUMN (default: its second column); samples "
       "whose label is empty or NA are left out of supervised steps")
      ("target", po::value(&input.target)->value_name("COLUMN"),
       "column (rows=samples) or line (rows=features) holding a continuous target (age, dose, a "
       "response): numbers, scored by correlation and mutual information instead of classes")
      ("targets", po::value(&input.targets)->value_name("SHEET[:COLUMN]"),
       "sample sheet with a continuous target in COLUMN (default: its second column); samples "
       "whose value is empty or NA are left out")
      ("na",
       po::value(&input.na)->value_name("TOKENS")->notifier([&input](const std::string&) { input.na_given = true; }),
       "comma-separated missing-value tokens (default: empty,NA,NaN,nan,null,?)")
      ("allow-inf", po::bool_switch(&input.allow_inf), "accept inf and -inf as values")
      ("memory", po::value(&input.memory)->value_name("SIZE"),
       "memory budget, e.g. 4G or 500M: a larger matrix is kept in a cache file on disk and "
       "worked through in column blocks (results are identical)")
      ("cache-dir", po::value(&input.cache_dir)->value_name("DIR"),
       "folder for that cache file (default: the output folder if it exists, else $TMPDIR)");
  desc.add(group);
}

void add_sample_options(po::options_description& desc, InputOptions& input, bool supervised) {
  po::options_description group("samples and annotations", 100, 50);
  group.add_options()
      ("samples", po::value(&input.samples)->value_name("FILE"),
       "use only these samples: one sample id per line, no header, # lines ignored")
      ("feature-info", po::value(&input.feature_info)->value_name("COLUMNS"),
       "rows=features: comma-separated header names of text columns describing the features "
       "(symbol, chromosome), carried into ranking.tsv and selection-log.tsv")
      ("sample-info", po::value(&input.sample_info)->value_name("COLUMNS"),
       "rows=samples: comma-separated header names of text columns describing the samples "
       "(batch, site), carried into samples.tsv, never scored")
      ("mark-by", po::value(&input.mark_by)->value_name("COLUMN"),
       "colour the report's sample plots by this column of the sample sheet (or --sample-info "
       "column) as well as by the label, e.g. batch");
  if (supervised)
    group.add_options()("min-class-size", po::value(&input.min_class_size)->default_value(0)->value_name("N"),
                        "leave out the samples of classes with fewer than N samples (0 = keep every class)");
  desc.add(group);
}

std::int64_t parse_size(const std::string& text, const char* option) {
  const auto bad = [&]() -> std::int64_t {
    throw_usage_error(std::string(option) + " " + text + " is not a size", "write it like 500M, 2G or 1.5GiB");
  };
  std::size_t used = 0;
  double value = 0;
  try {
    value = std::stod(text, &used);
  } catch (const std::exception&) {
    return bad();
  }
  std::string unit = text.substr(used);
  for (char& c : unit) c = static_cast<char>(std::toupper(static_cast<unsigned char>(c)));
  if (unit.ends_with("IB")) unit.erase(unit.size() - 2);
  else if (unit.size() > 1 && unit.ends_with("B")) unit.pop_back();
  double scale = 1;
  if (unit == "K") scale = 1024.0;
  else if (unit == "M") scale = 1024.0 * 1024;
  else if (unit == "G") scale = 1024.0 * 1024 * 1024;
  else if (unit == "T") scale = 1024.0 * 1024 * 1024 * 1024;
  else if (!unit.empty() && unit != "B") return bad();
  if (!(value > 0) || value * scale > 9e18) return bad();
  return static_cast<std::int64_t>(value * scale);
}

namespace {

// Boost.Program_options (1.74) fills placeholders such as %canonical_option% into its messages
// until none is left, so a message quoting an argument that itself contains one never finishes
// (found by fuzzing). Such arguments get a message of our own.
std::string safe_message(const po::error& e, const std::vector<std::string>& args) {
  for (const auto& arg : args) {
    const auto first = arg.find('%');
    if (first != std::string::npos && arg.find('%', first + 1) != std::string::npos) {
      std::string shown = arg.substr(0, 60);
      for (char& c : shown)
        if (static_cast<unsigned char>(c) < 0x20) c = '?';
      return "cannot read the command line near \"" + shown + "\"";
    }
  }
  return e.what();
}

}  // namespace

bool parse_command_line(const std::vector<std::string>& args, const po::options_description& desc,
                        const Positionals& positional, std::ostream& out, po::variables_map* values) {
  // The positional arguments are options of their own, hidden from --help (the usage line names
  // them), each required.
  po::options_description all, hidden;
  po::positional_options_description order;
  for (const auto& [name, target] : positional) {
    hidden.add_options()(name, po::value(target)->required(), "");
    order.add(name, 1);
  }
  all.add(desc).add(hidden);
  po::variables_map vm;
  try {
    // Long options are never abbreviated: Boost would otherwise take --max-cor for --max-corr,
    // and a later option sharing the prefix would silently change what a script means.
    const int style = po::command_line_style::default_style & ~po::command_line_style::allow_guessing;
    po::store(po::command_line_parser(args).options(all).positional(order).style(style).run(), vm);
    if (vm.count("help")) {
      out << desc;
      return false;
    }
    po::notify(vm);
    if (values) *values = vm;
  } catch (const po::required_option& e) {
    const std::string name = e.get_option_name();
    if (name == "--data") throw_usage_error("the data file is missing", "give it as the first argument; see --help");
    if (name == "--plan") throw_usage_error("the plan file is missing", "pare apply PLAN.json NEWDATA; see --help");
    throw_usage_error(safe_message(e, args), "see --help");
  } catch (const po::too_many_positional_options_error&) {
    throw_usage_error("too many file arguments", "options start with --; see --help");
  } catch (const po::error& e) {
    throw_usage_error(safe_message(e, args), "see --help");
  }
  return true;
}

namespace {

char parse_delimiter(const std::string& text) {
  if (text.empty()) return 0;
  if (text == "," || text == "comma") return ',';
  if (text == "\t" || text == "\\t" || text == "tab") return '\t';
  if (text == ";" || text == "semicolon") return ';';
  throw_usage_error("--delimiter " + text + " is not one of comma, tab, semicolon");
}

std::vector<std::string> parse_na(const std::string& text) {
  std::vector<std::string> tokens;
  std::string token;
  for (char c : text) {
    if (c == ',') {
      tokens.push_back(token);
      token.clear();
    } else {
      token += c;
    }
  }
  tokens.push_back(token);
  return tokens;
}

std::vector<std::string> split_names(const std::string& text) {
  std::vector<std::string> names;
  if (text.empty()) return names;
  for (auto& name : parse_na(text)) names.push_back(std::move(name));
  return names;
}

}  // namespace

ReadOptions read_options_from(const InputOptions& input, const CommonOptions& common) {
  ReadOptions r;
  if (common.threads < 0) throw_usage_error("--threads must be 0 (all cores) or more");
  r.threads = common.threads;
  if (input.layout == "rows=samples" || input.layout == "samples") {
    r.layout = Layout::kRowsAreSamples;
  } else if (input.layout == "rows=features" || input.layout == "features") {
    r.layout = Layout::kRowsAreFeatures;
  } else {
    throw_usage_error("--layout " + input.layout + " is not rows=samples or rows=features");
  }
  r.delimiter = parse_delimiter(input.delimiter);
  if (!input.na.empty() || input.na_given) r.na_tokens = parse_na(input.na);
  r.allow_inf = input.allow_inf;
  const int responses = !input.label.empty() + !input.labels.empty() + !input.target.empty() + !input.targets.empty();
  if (responses > 1) throw_usage_error("give one of --label, --labels, --target and --targets");
  r.label_column = input.label.empty() ? input.target : input.label;
  r.label_is_target = input.label.empty() && !input.target.empty();
  r.label_optional = input.label_optional;
  r.info_optional = input.info_optional;
  r.feature_info = split_names(input.feature_info);
  r.sample_info = split_names(input.sample_info);
  if (!r.feature_info.empty() && r.layout != Layout::kRowsAreFeatures)
    throw_usage_error("--feature-info is for --layout rows=features (text columns beside each feature's values)",
                      "with rows=samples, text columns describe samples: --sample-info COLUMNS");
  if (!r.sample_info.empty() && r.layout != Layout::kRowsAreSamples)
    throw_usage_error("--sample-info is for --layout rows=samples (text columns beside each sample's values)",
                      "with rows=features, per-sample facts go in a sample sheet (--labels SHEET, --mark-by COLUMN)");
  if (!input.memory.empty()) {
    r.memory.bytes = parse_size(input.memory, "--memory");
    r.memory.cache_dir = input.cache_dir;
    if (r.memory.cache_dir.empty()) {
      std::error_code ec;
      if (std::filesystem::is_directory(common.out, ec)) r.memory.cache_dir = common.out;
    }
  } else if (!input.cache_dir.empty()) {
    throw_usage_error("--cache-dir is only used with --memory");
  }
  return r;
}

void check_input_options(const InputOptions& input, const CommonOptions& common) {
  const ReadOptions read = read_options_from(input, common);
  if (input.min_class_size < 0) throw_usage_error("--min-class-size must be 0 (keep every class) or more");
  if (input.min_class_size > 0 && input.has_target())
    throw_usage_error("--min-class-size is for class labels; a continuous target has no classes");
  if (!input.mark_by.empty() && input.sheet().empty() &&
      std::find(read.sample_info.begin(), read.sample_info.end(), input.mark_by) == read.sample_info.end())
    throw_usage_error("--mark-by " + input.mark_by + " needs a sample sheet with that column (--labels SHEET) or, "
                      "with rows=samples, --sample-info " + input.mark_by);
}

namespace {
std::ostream* warning_stream = nullptr;
}

void set_warning_stream(std::ostream* err) { warning_stream = err; }

void warn(const CommonOptions& common, const std::string& what) {
  if (!common.quiet && warning_stream != nullptr) *warning_stream << "pare: warning: " << cli_words(what) << "\n";
}

std::string cli_words(std::string_view text) { return spell_options(text, "--", '-'); }

DataRequest data_request(const InputOptions& input, const CommonOptions& common, bool supervised, bool hash) {
  DataRequest request;
  request.path = input.data;
  request.read = read_options_from(input, common);
  request.labels = input.sheet();
  request.target = input.has_target();
  request.samples = input.samples;
  request.min_class_size = input.min_class_size;
  request.supervised = supervised;
  request.mark_by = input.mark_by;
  request.hash = hash;
  return request;
}

LoadedData load_data(const DataRequest& request, const CommonOptions& common) {
  LoadedData loaded = pare::load_data(request);
  for (const auto& line : loaded.warnings) warn(common, line);
  return loaded;
}

}  // namespace pare::cli
