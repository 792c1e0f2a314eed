#include "cli/options.h"

#include <cctype>      // std::toupper
#include <filesystem>  // std::filesystem::is_directory
#include <string>      // std::stod

#include "pare/error.h"

namespace pare::cli {

void add_common_options(po::options_description& desc, CommonOptions& common,
                        const std::string& default_out) {
  common.out = default_out;
  desc.add_options()
      ("out", po::value(&common.out)->default_value(default_out), "folder for the output files")
      ("threads", po::value(&common.threads)->default_value(0),
       "worker threads (0 = all cores); results do not depend on it")
      ("seed", po::value(&common.seed)->default_value(1), "seed for anything random")
      ("quiet", po::bool_switch(&common.quiet), "print nothing but errors")
      ("raw-names", po::bool_switch()->notifier([](bool raw) { set_formula_guard(!raw); }),
       "write names exactly, even one a spreadsheet would run as a formula (by default a name "
       "starting with = + - @ is written with a leading ', which pare removes when reading)")
      ("help", "show this help");
}

void add_input_options(po::options_description& desc, InputOptions& input) {
  desc.add_options()
      ("layout", po::value(&input.layout)->default_value("rows=samples"),
       "rows=samples (a sample per line) or rows=features (a feature per line)")
      ("delimiter", po::value(&input.delimiter),
       "field separator: comma, tab or semicolon (default: detected from the header)")
      ("label", po::value(&input.label),
       "column (rows=samples) or line (rows=features) holding the class labels")
      ("labels", po::value(&input.labels),
       "sample sheet FILE[:COLUMN]: sample ids, then labels (default: its second column)")
      ("na",
       po::value(&input.na)->notifier([&input](const std::string&) { input.na_given = true; }),
       "comma-separated missing-value tokens (default: empty,NA,NaN,nan,null,?)")
      ("allow-inf", po::bool_switch(&input.allow_inf), "accept inf and -inf as values")
      ("memory", po::value(&input.memory),
       "memory budget, e.g. 4G or 500M: a larger matrix is kept in a cache file on disk and "
       "worked through in column blocks (results are identical)")
      ("cache-dir", po::value(&input.cache_dir),
       "folder for that cache file (default: the output folder if it exists, else $TMPDIR)");
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
                        const po::positional_options_description& positional, std::ostream& out,
                        po::variables_map* values) {
  po::variables_map vm;
  try {
    po::store(po::command_line_parser(args).options(desc).positional(positional).run(), vm);
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
  } catch (const po::error& e) {
    throw_usage_error(safe_message(e, args), "see --help");
  }
  return true;
}

po::positional_options_description positionals(std::initializer_list<const char*> names) {
  po::positional_options_description positional;
  for (const char* name : names) positional.add(name, 1);
  return positional;
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

}  // namespace

ReadOptions read_options_from(const InputOptions& input, const CommonOptions& common) {
  ReadOptions r;
  if (common.threads < 0) throw_usage_error("--threads must be 1 or more (0 = all cores)");
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
  if (!input.label.empty() && !input.labels.empty())
    throw_usage_error("give --label or --labels, not both");
  r.label_column = input.label;
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

void require_two_classes(const FeatureTable& table, const InputOptions& input) {
  const ClassCodes classes = encode_classes(table.labels);
  if (classes.classes.size() >= 2) return;
  std::string source = input.data;
  if (!input.labels.empty()) {
    const auto colon = input.labels.rfind(':');
    source = colon == std::string::npos || colon == 0 ? input.labels : input.labels.substr(0, colon);
  }
  throw_input_error({source}, "the labels (" + (table.label_name.empty() ? std::string("label") : table.label_name) +
                                  ") have one class, " + (classes.classes.empty() ? std::string("none") : classes.classes[0]) +
                                  "; scoring against a label needs at least two",
                    "check the label column, or leave out the labels to rank by variance");
}

FeatureTable load_table(const InputOptions& input, const CommonOptions& common) {
  const ReadOptions options = read_options_from(input, common);
  // The sheet is small: read it first so its mistakes show before a long read of the data.
  SampleSheet sheet;
  if (!input.labels.empty()) sheet = read_sample_sheet(input.labels);
  FeatureTable table = read_table(input.data, options);
  if (!input.labels.empty()) attach_labels(table, sheet);
  return table;
}

}  // namespace pare::cli
