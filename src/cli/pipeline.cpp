#include "cli/pipeline.h"

#include <algorithm>  // std::find
#include <cmath>      // std::floor
#include <cstdio>     // std::snprintf
#include <utility>    // std::exchange

#include "pare/demo.h"
#include "pare/error.h"
#include "pare/folds.h"
#include "pare/io.h"
#include "pare/load.h"
#include "pare/plan.h"
#include "pare/pipeline.h"
#include "pare/projection.h"
#include "pare/reduce.h"
#include "pare/run_files.h"
#include "pare/samples.h"
#include "pare/sampling.h"

namespace pare::cli {

namespace {

void add_projection_options(po::options_description& desc, ProjectionOptions& o, bool& no_center,
                            bool required) {
  auto components = po::value(&o.components)->value_name("K");
  if (required) components->required();
  else components->default_value(0);
  // `project` has no numbered pipeline steps and needs K >= 1.
  const std::string step = required ? "" : "8. ";
  desc.add_options()
      ("components", components,
       (step + (required ? "number of components K (1 to min(samples, features))"
                         : "truncated PCA: number of components K (0 = none)")).c_str())
      ("no-center", po::bool_switch(&no_center), (step + "do not centre: plain truncated SVD").c_str())
      ("tolerance", po::value(&o.tolerance)->default_value(1e-8, "1e-08")->value_name("T"),
       (step + "convergence: Ritz residuals <= this x the largest eigenvalue").c_str())
      ("max-iterations", po::value(&o.max_iterations)->default_value(0)->value_name("N"),
       (step + "Krylov blocks before giving up (0: as many as fit in 60 x (K + 10) columns)").c_str());
}

// Reads, reduces and writes; shared by `reduce`, `project` and `demo`. `subsample` (> 0): the run
// uses a stratified random subset of the samples (subsample_rows).
PipelineResult reduce_and_write(const InputOptions& input, const CommonOptions& common, PipelineOptions options,
                                const std::vector<std::string>& command_line, std::ostream& out,
                                LoadedData* kept = nullptr, double subsample = 0) {
  const bool supervised = options.select && options.reduce.relevance && input.has_response();
  const DataRequest request = data_request(input, common, supervised);
  LoadedData loaded = load_data(request, common);
  std::vector<std::string> drawn;
  if (subsample > 0) {
    const std::vector<std::int64_t> rows = subsample_rows(loaded.table, subsample, common.seed);
    for (const std::int64_t i : rows) drawn.push_back(loaded.table.sample_ids[static_cast<std::size_t>(i)]);
    if (!loaded.marks.empty()) {
      std::vector<std::string> marks;
      for (const std::int64_t i : rows) marks.push_back(loaded.marks[static_cast<std::size_t>(i)]);
      loaded.marks = std::move(marks);
    }
    keep_samples(loaded.table, rows, request.read.memory);
  }
  // (`project` selects nothing, so the note is only for `reduce`)
  if (!common.quiet && !loaded.table.has_labels() && !loaded.table.has_target() && options.select)
    out << "pare reduce: no labels given, so features are ranked by variance and the supervised steps "
           "(relevance, --fdr) are skipped\n";
  RunRecord record = run_record(request, loaded, command_line, common.seed);
  record.subsample = subsample;
  record.subsample_ids = std::move(drawn);
  options.seed = common.seed;
  options.threads = common.threads;
  options.memory = request.read.memory;
  const PipelineResult result = reduce_to_folder(loaded.table, options, record, common.out);
  if (!common.quiet) out << cli_words(reduce_summary(loaded.table, result, record, common.out));
  if (kept) *kept = std::move(loaded);
  return result;
}

// The reduce options as the command line gives them, before finish_reduce_options reads them into
// ReduceOptions.
struct ReduceWords {
  std::string impute, rank_by, estimator, scheme, balance, balance_export, normalize;
  double drop_samples = 1;
  bool no_missing = false, no_variance = false, no_prune = false;
};

void add_reduce_options(po::options_description& desc, ReduceOptions& o, ReduceWords& w) {
  StabilityOptions& st = o.stability;
  desc.add_options()
      ("drop-samples-missing-above", po::value(&w.drop_samples)->default_value(1, "1")->value_name("FRACTION"),
       "0. first leave out the samples missing more than this fraction of their values (1 = none)")
      ("count-floor", po::value(&o.count_floor)->default_value(0, "0")->value_name("C"),
       "0. with --floor-samples N: keep a feature only when N samples have a raw value of C or more")
      ("floor-samples", po::value(&o.floor_samples)->default_value(0)->value_name("N"), "0. see --count-floor")
      ("normalize", po::value(&w.normalize)->value_name("HOW"),
       "0. normalise every sample: sum (scaled to a total of 10^6) or quantile (onto a reference distribution "
       "learned here and replayed by apply)")
      ("drop-missing-above", po::value(&o.drop_missing_above)->default_value(0.2, "0.2")->value_name("FRACTION"),
       "1. drop features missing in more than this fraction of the samples")
      ("no-missing-filter", po::bool_switch(&w.no_missing), "1. skip step 1")
      ("impute", po::value(&w.impute)->default_value("mean")->value_name("HOW"),
       "2. fill gaps with the feature's mean, median or zero, or knn: the mean over the k nearest samples "
       "that observe it (nan-Euclidean distance over the features that pass step 1)")
      ("impute-neighbors", po::value(&o.impute_neighbors)->default_value(5)->value_name("k"), "2. k of --impute knn")
      ("log2", po::bool_switch(&o.log2), "3. transform values to log2(x + 1)")
      ("scale", po::bool_switch(&o.scale), "3. z-score the kept features in the output")
      ("min-variance", po::value(&o.min_variance)->default_value(1e-8, "1e-08")->value_name("V"),
       "4. drop features with variance below V")
      ("drop-low-variance", po::value(&o.drop_low_variance)->default_value(0.0, "0")->value_name("FRACTION"),
       "4. also drop this lowest fraction by variance")
      ("no-variance-filter", po::bool_switch(&w.no_variance), "4. skip step 4")
      ("rank-by", po::value(&w.rank_by)->value_name("CRITERION"),
       "5. classes: mi (the default), chi2, chi2-counts, f or variance; a target: spearman (the "
       "default), pearson, mi or variance")
      ("fdr", po::value(&o.fdr)->default_value(1.0, "1")->value_name("Q"),
       "5. keep features with q <= Q for the ranking test")
      ("bins", po::value(&o.score.bins)->default_value(10)->value_name("B"), "5. equal-frequency bins for mi and chi2")
      ("mi-estimator", po::value(&w.estimator)->default_value("binned")->value_name("E"), "5. binned or knn")
      ("neighbors", po::value(&o.score.neighbors)->default_value(3)->value_name("k"),
       "5. k of the knn estimator (for a target, mi is always the knn estimate)")
      ("max-corr", po::value(&o.max_corr)->default_value(0.9, "0.9")->value_name("R"),
       "6. drop a feature whose |r| with a kept one is above R")
      ("no-prune", po::bool_switch(&w.no_prune), "6. skip step 6")
      ("keep", po::value(&o.keep)->default_value(0)->value_name("K"), "7. keep the first K survivors (0 = all)")
      ("resamples", po::value(&st.resamples)->default_value(0)->value_name("B"),
       "5-7. stability selection: run steps 5-7 on B random subsets of the samples and keep the features "
       "kept often enough (0 = off; --keep is then what each subset keeps, and --fdr applies in each)")
      ("resample-fraction", po::value(&st.fraction)->default_value(0.5, "0.5")->value_name("F"),
       "5-7. the fraction of the samples in each subset (stratified)")
      ("min-stability", po::value(&st.min_stability)->default_value(0.6, "0.6")->value_name("PI"),
       "5-7. keep features kept in at least this fraction of the subsets, in (0.5, 1]")
      ("resample-scheme", po::value(&w.scheme)->default_value("halves")->value_name("S"),
       "5-7. halves (independent subsets) or pairs (each subset with its complement)")
      ("balance", po::value(&w.balance)->value_name("smallest"),
       "5. score on every class down-sampled to the smallest class (seeded; in each subset with --resamples)")
      ("balance-export", po::value(&w.balance_export)->value_name("HOW"),
       "also write balanced.csv for training a model: smallest (down-sample), largest (repeat samples of "
       "smaller classes) or smote (synthetic samples between neighbours); apply never balances");
}

void finish_reduce_options(ReduceOptions& o, const ReduceWords& w, const CommonOptions& common,
                           const InputOptions& input) {
  o.impute = parse_impute(w.impute);
  o.rank_by = parse_criterion(w.rank_by.empty() ? (input.has_target() ? "spearman" : "mi") : w.rank_by);
  if (input.has_response()) require_criterion_fits(o.rank_by, input.has_target());
  if (w.estimator == "knn") o.score.mi = MiEstimator::kKnn;
  else if (w.estimator != "binned") throw_usage_error("--mi-estimator " + w.estimator + " is not binned or knn");
  o.stability.scheme = parse_resample_scheme(w.scheme);
  o.seed = common.seed;
  if (!w.balance.empty()) {
    o.balance = parse_balance(w.balance);
    if (o.balance != Balance::kNone && input.has_target())
      throw_usage_error("--balance down-samples classes, and a continuous target has none");
    if (o.balance != Balance::kNone && !input.has_response())
      throw_usage_error("--balance needs class labels", "give --label COLUMN or --labels SHEET");
  }
  if (!w.normalize.empty()) o.normalize = parse_normalize(w.normalize);
  o.missing_filter = !w.no_missing;
  o.variance_filter = !w.no_variance;
  o.prune = !w.no_prune;
  o.threads = common.threads;
  check_reduce_options(o);
}

void finish_balance_export(PipelineOptions& pipeline, const ReduceWords& w, const InputOptions& input) {
  pipeline.drop_samples_missing_above = w.drop_samples;
  if (!(w.drop_samples >= 0 && w.drop_samples <= 1))
    throw_usage_error("--drop-samples-missing-above must be between 0 and 1 (a fraction of the features)");
  if (w.balance_export.empty()) return;
  pipeline.balance_export = parse_balance_export(w.balance_export);
  if (!input.has_response() || input.has_target())
    throw_usage_error("--balance-export balances classes, so it needs class labels",
                      "give --label COLUMN or --labels SHEET");
}

void check_projection_options(const ProjectionOptions& o, bool required) {
  if (o.components < (required ? 1 : 0))
    throw_usage_error(required ? "--components must be 1 or more" : "--components must be 0 (none) or more");
  if (!(o.tolerance > 0 && o.tolerance < 1)) throw_usage_error("--tolerance must be above 0 and below 1");
  if (o.max_iterations < 0) throw_usage_error("--max-iterations must be 0 (automatic) or more");
}

}  // namespace

int command_reduce(const std::vector<std::string>& args, std::ostream& out) {
  CommonOptions common;
  InputOptions input;
  PipelineOptions pipeline;
  ReduceOptions& options = pipeline.reduce;
  ReduceWords words;
  po::options_description desc(
      "pare reduce DATA [--label COLUMN | --labels SHEET[:COLUMN] | --target COLUMN | --targets SHEET[:COLUMN]]\n"
      "            --out DIR [options]\n\n"
      "Runs the reduction pipeline (steps 0-8 below, in order) and writes ranking.tsv,\n"
      "selection-log.tsv (one line per input feature: kept or dropped, by which step, why), the\n"
      "reduced matrix (reduced.csv, or reduced.tsv for tab-separated input), plan.json (replayable\n"
      "with pare apply), samples.tsv (per sample: label, missing rate, outlier distance and flag)\n"
      "and report.html (plots; open it in a browser).\n\nthe steps, in order",
      100, 50);
  bool no_center = false;
  add_reduce_options(desc, options, words);
  add_projection_options(desc, pipeline.projection, no_center, false);
  double subsample = 0;
  desc.add_options()("drop-outliers", po::bool_switch(&pipeline.drop_outliers),
                     "remove the samples flagged as outliers (samples.tsv) before step 1")
      ("subsample", po::value(&subsample)->value_name("N|FRACTION"),
       "use a stratified random subset of the samples for a quick pass: N samples, or a fraction in (0, 1)");
  add_input_options(desc, input);
  add_sample_options(desc, input, true);
  add_common_options(desc, common, "pare-reduce");
  if (!parse_command_line(args, desc, {{"data", &input.data}}, out)) return 0;
  // Every option is checked before the data is read (a large file takes minutes).
  finish_reduce_options(options, words, common, input);
  finish_balance_export(pipeline, words, input);
  if (subsample != 0 && !(subsample >= 2 && subsample == std::floor(subsample)) && !(subsample > 0 && subsample < 1))
    throw_usage_error("--subsample must be a whole number of samples (2 or more) or a fraction between 0 and 1");
  if (options.fdr < 1 && !input.has_response())
    throw_usage_error("--fdr filters on a test against the labels, and no labels were given",
                      "give --label COLUMN, --labels SHEET, --target COLUMN or --targets SHEET, or leave out --fdr");
  pipeline.projection.center = !no_center;
  pipeline.projection.scale = options.scale;
  check_projection_options(pipeline.projection, false);
  check_input_options(input, common);
  std::vector<std::string> command_line{"pare", "reduce"};
  command_line.insert(command_line.end(), args.begin(), args.end());
  reduce_and_write(input, common, pipeline, command_line, out, nullptr, subsample);
  return 0;
}

int command_project(const std::vector<std::string>& args, std::ostream& out) {
  CommonOptions common;
  InputOptions input;
  PipelineOptions pipeline;
  pipeline.select = false;  // every selection step off: all features, input order, mean-filled
  bool no_center = false;
  po::options_description desc(
      "pare project DATA --components K --out DIR [options]\n\n"
      "Truncated PCA (centred; --scale for correlation PCA) or truncated SVD (--no-center) of every\n"
      "feature, no selection. Gaps are filled with the feature's mean first. Writes scores.csv,\n"
      "loadings.tsv, explained.tsv, plan.json (pare apply projects new samples with it),\n"
      "samples.tsv and report.html.\n\nthe projection",
      100, 50);
  std::string normalize;
  desc.add_options()("normalize", po::value(&normalize)->value_name("HOW"),
                     "first normalise every sample, as reduce --normalize does: sum or quantile")
      ("log2", po::bool_switch(&pipeline.reduce.log2),
                     "analyse log2(x + 1) of the values, as reduce --log2 does")
      ("scale", po::bool_switch(&pipeline.projection.scale), "divide each centred feature by its sd");
  add_projection_options(desc, pipeline.projection, no_center, true);
  desc.add_options()("drop-outliers", po::bool_switch(&pipeline.drop_outliers),
                     "remove the samples flagged as outliers (samples.tsv) before the PCA");
  add_input_options(desc, input);
  add_sample_options(desc, input, false);
  add_common_options(desc, common, "pare-project");
  if (!parse_command_line(args, desc, {{"data", &input.data}}, out)) return 0;
  pipeline.projection.center = !no_center;
  if (!normalize.empty()) pipeline.reduce.normalize = parse_normalize(normalize);
  check_projection_options(pipeline.projection, true);
  check_input_options(input, common);
  std::vector<std::string> command_line{"pare", "project"};
  command_line.insert(command_line.end(), args.begin(), args.end());
  reduce_and_write(input, common, pipeline, command_line, out);
  return 0;
}

int command_folds(const std::vector<std::string>& args, std::ostream& out) {
  CommonOptions common;
  InputOptions input;
  PipelineOptions pipeline;
  FoldOptions folds;
  ReduceOptions& options = pipeline.reduce;
  ReduceWords words;
  bool no_center = false;
  po::options_description desc(
      "pare folds DATA (--label COLUMN | --labels SHEET[:COLUMN] | --target COLUMN | --targets SHEET[:COLUMN])\n"
      "           --folds K [--repeats R] [--groups COLUMN] --out DIR [reduce options]\n\n"
      "Selection inside cross-validation: deals the samples into K folds (stratified by class; for a\n"
      "target, sorted by it and dealt in blocks of K; with --groups, each group in one fold), and for\n"
      "each fold runs reduce on the other samples only (DIR/rR-fF/, as reduce --samples with those\n"
      "samples would) and applies its plan to the held-out samples (DIR/rR-fF/held-out/). Writes\n"
      "folds.tsv (sample, repeat, fold) and kept-across-folds.tsv (how often each feature was kept).\n\n"
      "folds",
      100, 50);
  desc.add_options()
      ("folds", po::value(&folds.folds)->required()->value_name("K"), "number of folds, 2 or more (5 or 10 are usual)")
      ("repeats", po::value(&folds.repeats)->default_value(1)->value_name("R"),
       "deal the folds R times, each time afresh (repeated K-fold)")
      ("groups", po::value(&folds.groups)->value_name("COLUMN"),
       "keep samples sharing a value of this column in one fold (a patient, batch or site): a column of "
       "the sample sheet, or a --sample-info column");
  po::options_description steps("the steps of each reduction, in order", 100, 50);
  add_reduce_options(steps, options, words);
  add_projection_options(steps, pipeline.projection, no_center, false);
  steps.add_options()("drop-outliers", po::bool_switch(&pipeline.drop_outliers),
                      "remove the training samples flagged as outliers before step 1");
  desc.add(steps);
  add_input_options(desc, input);
  add_sample_options(desc, input, true);
  add_common_options(desc, common, "pare-folds");
  if (!parse_command_line(args, desc, {{"data", &input.data}}, out)) return 0;
  // Every option is checked before the data is read.
  check_fold_options(folds);
  if (!input.has_response())
    throw_usage_error("folds needs class labels or a target: the folds are stratified by it and each split "
                      "selects against it",
                      "give --label COLUMN, --labels SHEET, --target COLUMN or --targets SHEET");
  finish_reduce_options(options, words, common, input);
  finish_balance_export(pipeline, words, input);
  pipeline.projection.center = !no_center;
  pipeline.projection.scale = options.scale;
  check_projection_options(pipeline.projection, false);
  check_input_options(input, common);
  const DataRequest request = data_request(input, common, options.relevance);
  if (!folds.groups.empty()) check_group_column(request, folds.groups);
  std::vector<std::string> command_line{"pare", "folds"};
  command_line.insert(command_line.end(), args.begin(), args.end());
  const LoadedData loaded = load_data(request, common);
  pipeline.seed = common.seed;
  pipeline.threads = common.threads;
  pipeline.memory = request.read.memory;
  const FoldsResult result = folds_to_folder(request, loaded, pipeline, folds, command_line, common.out);
  for (const auto& split : result.splits)
    for (const auto& line : split.warnings) warn(common, line);
  if (!common.quiet) out << cli_words(folds_summary(loaded, result, common.out));
  return 0;
}

namespace {

std::string join_names(const std::vector<std::string>& names) {
  std::string out;
  for (const auto& n : names) out += (out.empty() ? "" : ",") + n;
  return out;
}

}  // namespace

int command_apply(const std::vector<std::string>& args, std::ostream& out) {
  CommonOptions common;
  InputOptions input;
  std::string plan_path;
  bool allow_missing = false;
  po::options_description desc(
      "pare apply PLAN.json NEWDATA --out DIR [options]\n\n"
      "Replays a saved reduction on new samples: selects the plan's features by name, fills gaps with\n"
      "the training values, applies the same transform, and writes the reduced matrix (reduced.csv,\n"
      "or reduced.tsv for tab-separated input), apply-log.tsv and, with a projection in the plan,\n"
      "scores.csv. Reading options default to those recorded in the plan (the delimiter is\n"
      "detected from the new file).\n\napply",
      100, 50);
  desc.add_options()("allow-missing-features", po::bool_switch(&allow_missing),
                     "fill features the new data lacks with their training values instead of stopping "
                     "(refused when more than half of the plan's features are absent)");
  add_input_options(desc, input);
  add_sample_options(desc, input, false);
  add_common_options(desc, common, "pare-apply");
  po::variables_map values;
  if (!parse_command_line(args, desc, {{"plan", &plan_path}, {"data", &input.data}}, out, &values)) return 0;
  check_input_options(input, common);
  const Plan plan = load_plan(plan_path);
  // Reading options the command line did not set come from the plan.
  const auto given = [&](const char* name) { return values.count(name) > 0 && !values[name].defaulted(); };
  if (!given("layout")) input.layout = plan.layout;
  // (the delimiter is detected from the new file's header: held-out samples often come as CSV
  // when the training export was TSV)
  // The plan's label column is read when the new data has it; new samples often have none. apply
  // scores nothing: a target is carried to samples.tsv as written, and no sample is left out.
  if (input.has_target()) {
    input.label = std::exchange(input.target, {});
    input.labels = std::exchange(input.targets, {});
  } else if (!given("label") && !given("labels")) {
    input.label = plan.label;
    input.label_optional = true;
  }
  if (!given("na")) {
    input.na.clear();
    for (std::size_t i = 0; i < plan.na_tokens.size(); ++i) input.na += (i ? "," : "") + plan.na_tokens[i];
    input.na_given = true;
  }
  if (!given("allow-inf")) input.allow_inf = plan.allow_inf;
  // The plan's annotation columns are carried when the new data has them.
  if (!given("feature-info") && !given("sample-info") && input.layout == plan.layout) {
    input.feature_info = join_names(plan.feature_info);
    input.sample_info = join_names(plan.sample_info);
    input.info_optional = true;
  }

  const LoadedData loaded = load_data(data_request(input, common, false, false), common);
  const ApplyResult applied = apply_to_folder(plan, loaded.table, allow_missing, common.out, {input.data, plan_path, input.samples},
                                              common.threads);
  if (!common.quiet) out << cli_words(apply_summary(plan, loaded.table, applied, common.out));
  return 0;
}

// The demo's last step: the same selection inside 5-fold cross-validation (pare folds), to show
// how a model would be fitted without the held-out samples taking part in the selection.
void demo_folds(const InputOptions& input, const CommonOptions& common, PipelineOptions pipeline,
                std::ostream& out) {
  CommonOptions folds_common = common;
  folds_common.out = join_path(common.out, "folds");
  FoldOptions folds;
  folds.folds = 5;
  pipeline.projection.components = 0;
  pipeline.seed = common.seed;
  pipeline.threads = common.threads;
  const std::vector<std::string> command_line{"pare", "folds", input.data, "--layout", "rows=features", "--labels",
                                              input.labels, "--log2", "--max-corr", "0.9", "--keep", "200", "--folds",
                                              "5", "--out", folds_common.out};
  if (!common.quiet)
    out << "\nThe same selection inside 5-fold cross-validation: each split selects on its training samples only and "
           "applies the plan to its held-out fold.\n";
  const DataRequest request = data_request(input, folds_common, true);
  const LoadedData loaded = load_data(request, folds_common);
  const FoldsResult result = folds_to_folder(request, loaded, pipeline, folds, command_line, folds_common.out);
  for (const auto& split : result.splits)
    for (const auto& line : split.warnings) warn(common, line);
  if (!common.quiet) out << cli_words(folds_summary(loaded, result, folds_common.out));
}

// Then stability selection: the selection run again on 100 random halves of the samples, keeping
// the transcripts chosen in at least 60% of them.
void demo_stability(const InputOptions& input, const std::string& truth, const CommonOptions& common,
                    PipelineOptions pipeline, std::ostream& out) {
  CommonOptions stability_common = common;
  stability_common.out = join_path(common.out, "stability");
  pipeline.projection.components = 0;
  pipeline.reduce.keep = 50;
  pipeline.reduce.stability.resamples = 100;
  const std::vector<std::string> command_line{"pare", "reduce", input.data, "--layout", "rows=features", "--labels",
                                              input.labels, "--log2", "--max-corr", "0.9", "--keep", "50",
                                              "--resamples", "100", "--out", stability_common.out};
  InputOptions plain = input;
  plain.mark_by.clear();
  if (!common.quiet)
    out << "\nStability selection: the same steps on 100 random halves of the samples, each keeping 50; a "
           "transcript is selected when kept in at least 60% of the halves.\n";
  LoadedData loaded;
  const PipelineResult run = reduce_and_write(plain, stability_common, pipeline, command_line, out, &loaded);
  const DemoRecovery d = evaluate_demo(truth, loaded.table, run.reduction);
  if (!common.quiet)
    out << "  selected " << d.kept << ": " << d.kept_planted << " planted informative transcripts and "
        << d.kept - d.kept_planted << " others (" << d.informative_kept << " of the " << d.informative
        << " planted)\n";
}

int demo_reduce(const std::string& data, const std::string& samples, const std::string& truth,
                const CommonOptions& common, std::ostream& out) {
  InputOptions input;
  input.data = data;
  input.layout = "rows=features";
  input.labels = samples + ":condition";
  input.mark_by = "batch";
  ReduceOptions options;
  // Transcript abundances are log-normal; analysing them on the log scale is common practice, and
  // it keeps a few mean-imputed cells in a long right tail from weakening correlations.
  options.log2 = true;
  options.max_corr = 0.9;
  options.keep = 200;
  options.threads = common.threads;
  CommonOptions reduce_common = common;
  reduce_common.out = join_path(common.out, "reduce");
  const std::vector<std::string> command_line{"pare", "reduce", data, "--layout", "rows=features", "--labels",
                                              input.labels, "--log2", "--max-corr", "0.9", "--keep", "200", "--components", "3",
                                              "--mark-by", "batch", "--out", reduce_common.out};
  if (!common.quiet) out << "\n";
  PipelineOptions pipeline;
  pipeline.reduce = options;
  pipeline.projection.components = 3;
  LoadedData loaded;
  const PipelineResult run = reduce_and_write(input, reduce_common, pipeline, command_line, out, &loaded);
  const DemoRecovery d = evaluate_demo(truth, loaded.table, run.reduction);
  if (!common.quiet) {
    out << "\n" << cli_words(demo_recovery_text(d, truth, run, loaded.marks));
    out << "\nreport: " << join_path(reduce_common.out, "report.html") << " (open it in a browser)\n";
  }
  demo_folds(input, common, pipeline, out);
  demo_stability(input, truth, common, pipeline, out);
  return 0;
}

}  // namespace pare::cli
