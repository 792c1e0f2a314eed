#include "cli/commands.h"

#include <algorithm>  // std::max_element, std::min_element
#include <chrono>     // std::chrono::steady_clock
#include <cstdio>     // std::snprintf
#include <new>        // std::bad_alloc

#include "cli/options.h"
#include "pare/demo.h"
#include "pare/error.h"
#include "pare/io.h"
#include "pare/profile.h"

namespace pare::cli {

namespace {

constexpr const char* kUsage =
    "pare " PARE_VERSION " - shrink wide numeric matrices to informative, non-redundant features\n"
    "\n"
    "usage: pare COMMAND [options]\n"
    "\n"
    "commands:\n"
    "  scan DATA   profile a matrix: missingness, variance, flagged features, class balance\n"
    "  demo        generate the greenhouse drought-trial demo data and scan it\n"
    "\n"
    "'pare COMMAND --help' lists a command's options; 'pare --version' prints the version.\n";

std::string thousands(std::int64_t v) {
  std::string digits = std::to_string(v < 0 ? -v : v);
  std::string out;
  const int lead = static_cast<int>(digits.size() % 3);
  for (std::size_t i = 0; i < digits.size(); ++i) {
    if (i > 0 && (static_cast<int>(i) - lead) % 3 == 0) out += ',';
    out += digits[i];
  }
  return v < 0 ? "-" + out : out;
}

std::string fixed(double v, int decimals) {
  char buffer[64];
  std::snprintf(buffer, sizeof buffer, "%.*f", decimals, v);
  return buffer;
}

std::string percent(double fraction) {
  return fixed(100.0 * fraction, fraction > 0 && fraction < 0.001 ? 3 : 1) + "%";
}

const char* layout_name(Layout l) {
  return l == Layout::kRowsAreSamples ? "rows=samples" : "rows=features";
}

const char* delimiter_name(char d) {
  return d == '\t' ? "tab" : d == ';' ? "semicolon" : "comma";
}

void print_scan_summary(std::ostream& out, const FeatureTable& t, const Profile& p,
                        const std::string& profile_path, double seconds) {
  const auto n = t.n_samples(), m = t.n_features();
  const double cells = static_cast<double>(n) * static_cast<double>(m);
  out << "pare scan: " << t.source << "\n";
  out << "  shape      " << thousands(n) << " samples x " << thousands(m) << " features ("
      << layout_name(t.layout) << ", " << delimiter_name(t.delimiter) << "-delimited, read in "
      << fixed(seconds, 2) << " s)\n";
  out << "  missing    " << percent(cells > 0 ? static_cast<double>(p.missing_cells) / cells : 0)
      << " of cells (" << thousands(p.missing_cells) << ")";
  out << "; " << thousands(static_cast<std::int64_t>(p.samples_over.size()))
      << " samples above " << percent(p.options.sample_missing) << " missing";
  for (std::size_t k = 0; k < p.samples_over.size() && k < 5; ++k)
    out << (k == 0 ? ": " : ", ") << t.sample_ids[static_cast<std::size_t>(p.samples_over[k])];
  if (p.samples_over.size() > 5) out << ", ...";
  out << "\n";
  out << "  features   " << thousands(p.n_constant) << " constant, " << thousands(p.n_near_constant)
      << " near-constant, " << thousands(p.n_mostly_missing) << " mostly missing (> "
      << percent(p.options.mostly_missing) << "), " << thousands(p.n_all_missing)
      << " all missing, " << thousands(p.n_duplicate_name) << " with a duplicate name\n";
  if (!p.classes.classes.empty()) {
    out << "  classes    " << (t.label_name.empty() ? "label" : t.label_name) << ":";
    for (std::size_t k = 0; k < p.classes.classes.size(); ++k)
      out << (k == 0 ? " " : ", ") << p.classes.classes[k] << " " << thousands(p.classes.counts[k]);
    const auto [lo, hi] = std::minmax_element(p.classes.counts.begin(), p.classes.counts.end());
    out << " (majority:minority " << fixed(static_cast<double>(*hi) / static_cast<double>(*lo), 1)
        << ":1)";
    if (p.classes.classes.size() < 2) out << " - only one class: supervised steps need two";
    out << "\n";
  } else {
    out << "  classes    no labels given (--label COLUMN or --labels SHEET.csv)\n";
  }
  out << "  wrote      " << profile_path << "\n";
}

double seconds_since(std::chrono::steady_clock::time_point start) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
}

std::string join_path(const std::string& dir, const std::string& name) {
  if (dir.empty() || dir == ".") return name;
  return dir.back() == '/' ? dir + name : dir + "/" + name;
}

// Profiles `input` and writes profile.tsv to common.out.
int scan_and_report(const InputOptions& input, const CommonOptions& common, std::ostream& out) {
  const auto start = std::chrono::steady_clock::now();
  const FeatureTable table = load_table(input, common);
  const double read_seconds = seconds_since(start);
  ProfileOptions options;
  options.threads = common.threads;
  const Profile profile = profile_table(table, options);
  ensure_directory(common.out);
  const std::string path = join_path(common.out, "profile.tsv");
  write_file_atomically(path, profile_tsv(table, profile));
  if (!common.quiet) print_scan_summary(out, table, profile, path, read_seconds);
  return 0;
}

int command_scan(const std::vector<std::string>& args, std::ostream& out) {
  CommonOptions common;
  InputOptions input;
  po::options_description desc(
      "pare scan DATA [options]\n\n"
      "Profiles a matrix and writes profile.tsv (one line per feature: n, missing, missing_rate,\n"
      "mean, variance, sd, min, max, flags).\n\noptions");
  desc.add_options()("data", po::value(&input.data)->required(), "the data file (CSV/TSV, may be gzip)");
  add_input_options(desc, input);
  add_common_options(desc, common, ".");
  po::positional_options_description positional;
  positional.add("data", 1);
  std::string help;
  if (!parse_command_line(args, desc, positional, help)) {
    out << help;
    return 0;
  }
  return scan_and_report(input, common, out);
}

int command_demo(const std::vector<std::string>& args, std::ostream& out) {
  CommonOptions common;
  po::options_description desc(
      "pare demo [options]\n\n"
      "Generates the greenhouse drought-trial scenario (240 seedlings, 20,000 leaf transcripts,\n"
      "planted structure recorded in greenhouse-truth.tsv) and scans it.\n\noptions");
  add_common_options(desc, common, "pare-demo");
  std::string help;
  if (!parse_command_line(args, desc, {}, help)) {
    out << help;
    return 0;
  }
  const DemoFiles files = write_demo(common.out, common.seed);
  if (!common.quiet)
    out << "pare demo: wrote the greenhouse drought trial (seed " << common.seed << ")\n"
        << "  data       " << files.data << "\n"
        << "  samples    " << files.samples << "\n"
        << "  truth      " << files.truth << "\n\n";
  InputOptions input;
  input.data = files.data;
  input.layout = "rows=features";
  input.labels = files.samples + ":condition";
  return scan_and_report(input, common, out);
}

}  // namespace

int run(const std::vector<std::string>& args, std::ostream& out, std::ostream& err) {
  try {
    if (args.empty()) {
      err << kUsage;
      return static_cast<int>(ErrorKind::kUsage);
    }
    const std::string& command = args.front();
    const std::vector<std::string> rest(args.begin() + 1, args.end());
    if (command == "--version" || command == "version") {
      out << "pare " PARE_VERSION "\n";
      return 0;
    }
    if (command == "--help" || command == "-h" || command == "help") {
      out << kUsage;
      return 0;
    }
    if (command == "scan") return command_scan(rest, out);
    if (command == "demo") return command_demo(rest, out);
    throw_usage_error("unknown command '" + command + "'", "commands: scan, demo; see pare --help");
  } catch (const Error& e) {
    err << "pare: error: " << e.what() << "\n";
    return static_cast<int>(e.kind());
  } catch (const std::bad_alloc&) {
    err << "pare: error: out of memory (use a machine with more memory or a smaller input)\n";
    return static_cast<int>(ErrorKind::kOther);
  } catch (const std::exception& e) {
    err << "pare: error: " << e.what() << "\n";
    return static_cast<int>(ErrorKind::kOther);
  }
}

}  // namespace pare::cli
