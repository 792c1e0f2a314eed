#include "cli/commands.h"

#include <new>  // std::bad_alloc

#include "cli/options.h"
#include "cli/pipeline.h"
#include "pare/demo.h"
#include "pare/error.h"
#include "pare/load.h"
#include "pare/run_files.h"

namespace pare::cli {

namespace {

constexpr const char* kUsage =
    "pare " PARE_VERSION " - shrink wide numeric matrices to informative, non-redundant features\n"
    "\n"
    "usage: pare COMMAND [options]\n"
    "\n"
    "commands:\n"
    "  scan DATA         profile a matrix: missingness, variance, flagged features, class balance\n"
    "  rank DATA         score every feature against the class label or a target and rank them\n"
    "  reduce DATA       run the whole reduction; write the reduced matrix, a log and a plan\n"
    "  project DATA      truncated PCA / SVD of every feature\n"
    "  apply PLAN DATA   replay a saved reduction (and projection) on new samples\n"
    "  folds DATA        reduce inside each cross-validation fold, apply to the held-out samples\n"
    "  demo              write an invented drought-trial data set, then scan, reduce and fold it\n"
    "\n"
    "'pare COMMAND --help' lists a command's options; 'pare --version' prints the version.\n";

// Profiles `input` and screens its samples (on log2(x + 1) with `log2`); writes profile.tsv,
// samples.tsv and report.html to common.out.
int scan_and_report(const InputOptions& input, const CommonOptions& common, bool log2,
                    const std::vector<std::string>& command_line, std::ostream& out) {
  const DataRequest request = data_request(input, common, false);
  const LoadedData loaded = load_data(request, common);
  const RunRecord record = run_record(request, loaded, command_line, common.seed);
  const ScanResult scan = scan_to_folder(loaded.table, log2, record, common.out, common.threads);
  if (!common.quiet) out << cli_words(scan_summary(loaded.table, scan, record, common.out));
  return 0;
}

int command_scan(const std::vector<std::string>& args, std::ostream& out) {
  CommonOptions common;
  InputOptions input;
  bool log2 = false;
  po::options_description desc(
      "pare scan DATA [options]\n\n"
      "Profiles a matrix and writes profile.tsv (one line per feature: n, missing, missing_rate,\n"
      "mean, variance, sd, min, max, flags), samples.tsv (per sample: missing rate, outlier distance\n"
      "and flag) and report.html (plots; open it in a browser).\n\nscan",
      100, 50);
  desc.add_options()("log2", po::bool_switch(&log2), "screen samples for outliers on log2(x + 1), as reduce --log2 does");
  add_input_options(desc, input);
  add_sample_options(desc, input, false);
  add_common_options(desc, common, ".");
  if (!parse_command_line(args, desc, {{"data", &input.data}}, out)) return 0;
  check_input_options(input, common);
  std::vector<std::string> command_line{"pare", "scan"};
  command_line.insert(command_line.end(), args.begin(), args.end());
  return scan_and_report(input, common, log2, command_line, out);
}

int command_demo(const std::vector<std::string>& args, std::ostream& out) {
  CommonOptions common;
  po::options_description desc(
      "pare demo [options]\n\n"
      "Writes an invented greenhouse drought trial (240 seedlings, 20,000 leaf transcripts, two\n"
      "batches; the planted role of every transcript in greenhouse-truth.tsv), then runs pare on it\n"
      "as a user would: scan, then reduce (--log2 --max-corr 0.9 --keep 200 --components 3\n"
      "--mark-by batch) into DIR/reduce, and reports how much of the planted structure was\n"
      "recovered; then the same selection inside 5-fold cross-validation (pare folds) into\n"
      "DIR/folds. Open DIR/reduce/report.html afterwards.\n\noptions",
      100, 50);
  add_common_options(desc, common, "pare-demo", false);
  if (!parse_command_line(args, desc, {}, out)) return 0;
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
  input.mark_by = "batch";
  // The demo reduces on the log2 scale, so its scan screens samples on that scale too.
  scan_and_report(input, common, true,
                  {"pare", "scan", files.data, "--layout", "rows=features", "--labels", input.labels, "--log2",
                   "--mark-by", "batch", "--out", common.out},
                  out);
  return demo_reduce(files.data, files.samples, files.truth, common, out);
}

int command_rank(const std::vector<std::string>& args, std::ostream& out) {
  CommonOptions common;
  InputOptions input;
  RankOptions options;
  std::string rank_by, estimator = "binned";
  po::options_description desc(
      "pare rank DATA (--label COLUMN | --labels SHEET[:COLUMN] | --target COLUMN | --targets SHEET[:COLUMN])\n"
      "          [options]\n\n"
      "Scores every feature against the class label (binned mutual information, chi-square test,\n"
      "one-way ANOVA F) or a continuous target (Pearson r, Spearman rho, nearest-neighbour mutual\n"
      "information), with Benjamini-Hochberg q-values, and writes ranking.tsv, best first, and\n"
      "report.html (plots; open it in a browser).\n\nscoring and ranking",
      100, 50);
  desc.add_options()
      ("log2", po::bool_switch(&options.log2), "score log2(x + 1) of the values, as reduce --log2 does")
      ("rank-by", po::value(&rank_by)->value_name("CRITERION"),
       "classes: mi (the default), chi2, chi2-counts, f or variance; a target: spearman (the default), "
       "pearson, mi or variance")
      ("fdr", po::value(&options.fdr)->value_name("Q"), "keep features whose q-value for the ranking test is at most Q")
      ("keep", po::value(&options.keep)->default_value(0)->value_name("K"), "keep the first K features (0 = all)")
      ("bins", po::value(&options.score.bins)->default_value(10)->value_name("B"), "equal-frequency bins for mi and chi2")
      ("mi-estimator", po::value(&estimator)->default_value("binned")->value_name("E"), "binned or knn")
      ("neighbors", po::value(&options.score.neighbors)->default_value(3)->value_name("k"), "k of the knn estimator");
  add_input_options(desc, input);
  add_sample_options(desc, input, true);
  add_common_options(desc, common, ".");
  if (!parse_command_line(args, desc, {{"data", &input.data}}, out)) return 0;
  // Every option is checked before the data is read (a large file takes minutes).
  options.criterion = parse_criterion(rank_by.empty() ? (input.has_target() ? "spearman" : "mi") : rank_by);
  if (input.has_response()) require_criterion_fits(options.criterion, input.has_target());
  if (estimator == "knn") options.score.mi = MiEstimator::kKnn;
  else if (estimator != "binned") throw_usage_error("--mi-estimator " + estimator + " is not binned or knn");
  check_rank_options(options);
  if (!input.has_response())
    throw_usage_error("rank needs class labels or a target",
                      "give --label COLUMN, --labels SHEET.csv[:COLUMN], --target COLUMN or --targets SHEET.csv[:COLUMN]");
  check_input_options(input, common);
  std::vector<std::string> command_line{"pare", "rank"};
  command_line.insert(command_line.end(), args.begin(), args.end());
  const DataRequest request = data_request(input, common, true);
  LoadedData loaded = load_data(request, common);
  const RunRecord record = run_record(request, loaded, command_line, common.seed);
  const RankResult rank = rank_to_folder(loaded.table, options, record, common.out, common.threads);
  if (!common.quiet) out << cli_words(rank_summary(loaded.table, options, rank, record, common.out));
  return 0;
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
    set_warning_stream(&err);
    if (command == "scan") return command_scan(rest, out);
    if (command == "rank") return command_rank(rest, out);
    if (command == "reduce") return command_reduce(rest, out);
    if (command == "apply") return command_apply(rest, out);
    if (command == "project") return command_project(rest, out);
    if (command == "folds") return command_folds(rest, out);
    if (command == "demo") return command_demo(rest, out);
    throw_usage_error("unknown command '" + command + "'",
                      "commands: scan, rank, reduce, project, apply, folds, demo; see pare --help");
  } catch (const Error& e) {
    err << "pare: error: " << cli_words(e.what()) << "\n";
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
