#include "cli/pipeline.h"

#include <algorithm>   // std::find
#include <chrono>      // std::chrono::steady_clock
#include <filesystem>  // std::filesystem::equivalent
#include <future>      // std::async
#include <map>         // std::map
#include <memory>      // std::unique_ptr

#include <nlohmann/json.hpp>

#include "cli/text.h"
#include "internal/omp.h"
#include "internal/plan_document.h"
#include "internal/sha256.h"
#include "internal/spill.h"
#include "pare/error.h"
#include "pare/io.h"
#include "pare/demo.h"
#include "pare/outliers.h"
#include "pare/plan.h"
#include "pare/projection.h"
#include "pare/reduce.h"
#include "pare/report.h"

namespace pare::cli {

namespace {

// The output files of a run: opened under temporary names, all renamed only at the very end, so a
// failed run leaves none of them under a final name.
class OutputSet {
 public:
  OutputSet(std::string dir, std::vector<std::string> inputs) : dir_(std::move(dir)), inputs_(std::move(inputs)) {
    ensure_directory(dir_);
  }

  void add(const std::string& name, std::string_view content) { open(name).write(content); }

  /// Opens `name` for writing in pieces; it is renamed into place by commit() with the others.
  OutputFile& open(const std::string& name) {
    const std::string path = join_path(dir_, name);
    std::error_code ec;
    for (const auto& input : inputs_)
      if (std::filesystem::equivalent(path, input, ec))
        throw_output_error(path, "is the input file " + input, "choose another --out folder");
    files_.push_back(std::make_unique<OutputFile>(path));
    return *files_.back();
  }

  void commit() {
    for (auto& f : files_) f->commit();
  }

  std::string path(const std::string& name) const { return join_path(dir_, name); }

 private:
  std::string dir_;
  std::vector<std::string> inputs_;
  std::vector<std::unique_ptr<OutputFile>> files_;
};

void print_steps(std::ostream& out, const Reduction& r, bool selection) {
  std::vector<std::vector<std::string>> rows{{"step", "in", "out", "seconds"}};
  for (const auto& s : r.steps) {
    // `project` switches every selection step off; only reading, filling and the PCA are shown.
    if (!selection && s.name != "read" && s.name != "impute" && s.name != "project") continue;
    rows.push_back({s.name, thousands(s.in), thousands(s.out), fixed(s.seconds, 2)});
  }
  print_table(out, rows, 1);
}

struct ReduceRun {
  FeatureTable table;  // its values are used up by the PCA (centred in place, or compacted)
  Reduction reduction;
  std::unique_ptr<Projection> projection;
  std::string out_dir;
  SampleScreen screen;                                   // of every input sample
  std::vector<std::string> input_ids, input_labels;      // before --drop-outliers
  std::vector<char> dropped;                             // per input sample, or empty
  std::vector<std::string> marks;                        // --mark-by, per input sample
  std::vector<std::string> sample_info_names;            // --sample-info, per input sample
  std::vector<std::vector<std::string>> sample_info;
  SamplesLeftOut left_out;                               // unlabelled, small classes
  std::int64_t samples_read = 0;                         // samples in the file
};

// The plan's record of the sample screen, as JSON text: its rule and which samples it flagged and
// dropped.
std::string screen_section(const ReduceRun& run) {
  nlohmann::json flagged = nlohmann::json::array(), dropped = nlohmann::json::array();
  for (const std::int64_t i : run.screen.flagged()) flagged.push_back(run.input_ids[static_cast<std::size_t>(i)]);
  for (std::size_t i = 0; i < run.dropped.size(); ++i)
    if (run.dropped[i]) dropped.push_back(run.input_ids[i]);
  nlohmann::json section = {{"screened", run.screen.done},
                            {"rule", screen_rule(run.screen)},
                            {"flagged", flagged},
                            {"dropped", dropped},
                            {"samples_before_dropping", run.input_ids.size()}};
  if (run.screen.done) section["threshold"] = run.screen.robust.threshold;
  return section.dump();
}

// What to run after the selection: a projection of the kept features (components > 0).
struct ProjectSettings {
  ProjectionOptions options;
  bool selection_outputs = true;  // false for `project`: no ranking, log or reduced matrix
  bool drop_outliers = false;     // remove the samples the screen flags before anything else
};

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
      ("tolerance", po::value(&o.tolerance)->default_value(1e-7, "1e-07")->value_name("T"),
       (step + "convergence: Ritz residuals <= this x the largest eigenvalue").c_str())
      ("max-iterations", po::value(&o.max_iterations)->default_value(60)->value_name("N"),
       (step + "Krylov blocks before giving up").c_str());
}

// Reads, reduces and writes; shared by `reduce` and `demo`.
ReduceRun reduce_and_write(const InputOptions& input, const CommonOptions& common, const ReduceOptions& options,
                           const ProjectSettings& project, const std::vector<std::string>& command_line,
                           std::ostream& out) {
  // Hash the inputs while they are parsed.
  auto data_hash = std::async(std::launch::async, [&] { return internal::sha256_file(input.data); });
  const std::string sheet = input.labels.empty() ? std::string() : sheet_path_of(input.labels);
  const auto start = std::chrono::steady_clock::now();
  ReduceRun run;
  const bool supervised = options.relevance && (!input.label.empty() || !input.labels.empty());
  LoadedData loaded = load_data(input, common, supervised);
  run.table = std::move(loaded.table);
  run.marks = std::move(loaded.marks);
  run.left_out = loaded.left_out;
  run.samples_read = loaded.samples_read;
  const double read_seconds = seconds_since(start);
  // The sample screen sees the input as the reduction will (log2 included), before any sample
  // is dropped.
  const auto start_screen = std::chrono::steady_clock::now();
  ScreenOptions screen_options;
  screen_options.log2 = options.log2;
  screen_options.seed = common.seed;
  screen_options.threads = common.threads;
  // With labels, each sample is measured from its own class (classes are meant to separate).
  run.screen = screen_samples(run.table.values, screen_options, encode_classes(run.table.labels).codes);
  run.input_ids = run.table.sample_ids;
  run.input_labels = run.table.labels;
  run.sample_info_names = run.table.sample_info_names;
  run.sample_info = run.table.sample_info;
  if (project.drop_outliers) {
    run.dropped = run.screen.robust.flagged;
    run.dropped.resize(run.input_ids.size(), 0);
    const std::vector<std::int64_t> flagged = run.screen.flagged();
    if (!flagged.empty()) {
      std::vector<std::int64_t> rows;
      for (std::size_t i = 0; i < run.dropped.size(); ++i)
        if (!run.dropped[i]) rows.push_back(static_cast<std::int64_t>(i));
      keep_samples(run.table, rows, read_options_from(input, common).memory);
    }
  }
  const double screen_seconds = seconds_since(start_screen);
  if (run.table.has_labels() && options.relevance) require_two_classes(run.table, input);
  // (`project` selects nothing, so the note is only for `reduce`)
  if (!common.quiet && !run.table.has_labels() && project.selection_outputs)
    out << "pare reduce: no labels given, so features are ranked by variance and the supervised steps "
           "(relevance, --fdr) are skipped\n";
  RunRecord record;
  record.command_line = command_line;
  record.input_path = input.data;
  record.input_sha256 = data_hash.get();
  if (!sheet.empty()) {
    record.sheet_path = sheet;
    record.sheet_sha256 = internal::sha256_file(sheet);
    record.sheet_column = run.table.label_name;
  }
  const ReadOptions read = read_options_from(input, common);
  record.layout = layout_name(read.layout);
  record.label = input.label;
  record.na_tokens = read.na_tokens;
  record.allow_inf = read.allow_inf;
  record.seed = common.seed;
  record.feature_info = read.feature_info;
  record.sample_info = read.sample_info;
  record.samples_read = run.samples_read;
  if (!input.samples.empty()) {
    record.sample_list_path = input.samples;
    record.sample_list_sha256 = loaded.sample_list_sha256;
  }
  record.left_out = run.left_out;

  ReduceOptions reduce_options = options;
  reduce_options.memory_budget = read.memory.bytes;
  run.reduction = reduce(run.table, reduce_options);
  run.reduction.steps.insert(run.reduction.steps.begin(),
                             StepRecord{"read", run.table.n_features(), run.table.n_features(), read_seconds});
  const Reduction& r = run.reduction;
  std::vector<std::string> names;
  for (const std::int64_t j : r.kept) names.push_back(run.table.feature_names[static_cast<std::size_t>(j)]);

  std::vector<std::string> inputs{input.data};
  if (!sheet.empty()) inputs.push_back(sheet);
  if (!input.samples.empty()) inputs.push_back(input.samples);
  OutputSet files(common.out, inputs);
  // The report's strip plots show the leading kept features' values as reduced.csv holds them,
  // taken now: the PCA below may use the table's matrix as its workspace.
  ReportData report;
  if (project.selection_outputs) {
    std::vector<std::int64_t> top(r.kept.begin(), r.kept.begin() + std::min<std::ptrdiff_t>(6, std::ssize(r.kept)));
    add_top_features(report, run.table, top,
                     std::string("values as in ") + reduced_file_name(run.table.delimiter) + " (filled" +
                         (options.log2 ? ", log2(x + 1)" : "") + (options.scale ? ", z-scored" : "") + ")");
  }
  // ranking.tsv and the selection log are text built from names and scores alone, one thread
  // each: they are built alongside reduced.csv and the PCA, which leave a core idle part of the
  // time, and written after them. Under --memory they are built and written one at a time first,
  // so their text (about 400 bytes per feature) is not held while the rest runs.
  const bool bounded = read.memory.bytes > 0;
  std::future<std::string> ranking_text, log_text;
  if (project.selection_outputs) {
    if (bounded) {
      files.add("ranking.tsv", reduction_ranking_tsv(run.table, r));
      files.add("selection-log.tsv", selection_log_tsv(run.table, r));
    } else {
      ranking_text = std::async(std::launch::async, [&] { return reduction_ranking_tsv(run.table, r); });
      log_text = std::async(std::launch::async, [&] { return selection_log_tsv(run.table, r); });
    }
    OutputFile& reduced = files.open(reduced_file_name(run.table.delimiter));
    reduced.write_direct();
    write_reduced_matrix(run.table, r.kept, names, [&](std::string_view piece) { reduced.write(piece); });
  }
  PlanProjection plan_projection;
  if (project.options.components > 0) {
    const auto start_pca = std::chrono::steady_clock::now();
    const auto most = std::min<std::int64_t>(run.table.n_samples(), static_cast<std::int64_t>(r.kept.size()));
    if (project.options.components > most)
      throw Error(ErrorKind::kInput,
                  run.table.source + ": --components " + std::to_string(project.options.components) + " asks for more than " +
                      std::to_string(r.kept.size()) + " kept feature" + (r.kept.size() == 1 ? "" : "s") + " and " +
                      std::to_string(run.table.n_samples()) + " samples allow (at most " + std::to_string(most) +
                      "; ask for fewer, or keep more features)");
    ProjectionOptions po = project.options;
    po.scale = options.scale ? false : project.options.scale;  // --scale already standardised them
    po.seed = common.seed;
    po.threads = common.threads;
    // The kept columns are analysed in file order, so the data and the copy are both walked front
    // to back (on disk, in rank order nearly every column would map and drop a whole 2 MiB
    // window); the loadings, centres and scales are put back in rank order afterwards.
    const std::vector<std::size_t> by_file = internal::file_order(r.kept);
    bool identity = static_cast<std::int64_t>(r.kept.size()) == run.table.n_features();
    for (std::size_t k = 0; identity && k < by_file.size(); ++k) identity = r.kept[by_file[k]] == static_cast<std::int64_t>(k);
    Projection in_file_order;
    if (identity) {
      // Every feature: analyse the matrix in place, no copy.
      in_file_order = truncated_pca(run.table.values, po);
    } else if (!run.table.values.on_disk()) {
      // In memory the kept columns are moved to the front of the table's own matrix, in file
      // order, and analysed there: reduced.csv is written, and nothing after this reads the
      // values. A fresh copy would cost as much memory again, and on virtual machines a first
      // touch of fresh memory is slow (about 1.5 to 3 s per GiB measured on the benchmark VM).
      // Each column moves to a place at or before its own, and the places are taken in
      // increasing order, so no column is overwritten before it has moved.
      const Eigen::Index n = run.table.n_samples();
      float* const base = run.table.values.data();
      for (std::size_t k = 0; k < by_file.size(); ++k) {
        const auto from = static_cast<Eigen::Index>(r.kept[by_file[k]]), to = static_cast<Eigen::Index>(k);
        if (from != to) std::copy_n(base + from * n, n, base + to * n);
      }
      Eigen::Map<Matrix> front(base, n, static_cast<Eigen::Index>(by_file.size()));
      in_file_order = truncated_pca(front, po);
    } else {
      // On disk: a copy, itself on disk when it would take more than half the budget.
      MemoryBudget budget = read.memory;
      if (budget.bytes > 0) budget.bytes = std::max<std::int64_t>(1, budget.bytes / 2);
      Columns kept;
      kept.allocate(run.table.n_samples(), static_cast<Eigen::Index>(r.kept.size()), budget);
      const bool on_disk = run.table.values.on_disk() || kept.on_disk();
#pragma omp parallel num_threads(internal::thread_count(common.threads)) if (!on_disk)
      {
        const auto bytes = static_cast<std::size_t>(run.table.n_samples()) * sizeof(float);
        internal::WindowWalk from_walk(bytes), to_walk(bytes);
#pragma omp for schedule(static)
        for (std::size_t k = 0; k < by_file.size(); ++k) {
          const float* from = run.table.values.col(r.kept[by_file[k]]).data();
          float* to = kept.col(static_cast<Eigen::Index>(k)).data();
          std::copy(from, from + run.table.n_samples(), to);
          from_walk.visited(from);
          to_walk.visited(to);
        }
      }
      in_file_order = truncated_pca(kept, po);
    }
    run.projection = std::make_unique<Projection>(std::move(in_file_order));
    {
      Projection& p = *run.projection;
      const Eigen::MatrixXd loadings = p.loadings;
      const Eigen::VectorXd center = p.center, scale = p.scale;
      for (std::size_t k = 0; k < by_file.size(); ++k) {
        const auto rank = static_cast<Eigen::Index>(by_file[k]), at = static_cast<Eigen::Index>(k);
        p.loadings.row(rank) = loadings.row(at);
        p.center(rank) = center(at);
        p.scale(rank) = scale(at);
      }
    }
    const Projection& pr = *run.projection;
    files.add("scores.csv", scores_csv(pr.scores, run.table.sample_ids));
    // loadings.tsv is written and hashed piece by piece (p x K numbers need not be in memory as text).
    OutputFile& loadings = files.open("loadings.tsv");
    internal::Sha256 loadings_hash;
    write_loadings_tsv(pr.loadings, names, [&](std::string_view piece) {
      loadings.write(piece);
      loadings_hash.update(piece);
    });
    files.add("explained.tsv", explained_tsv(pr));
    plan_projection.projection = run.projection.get();
    plan_projection.loadings_file = "loadings.tsv";
    plan_projection.loadings_sha256 = loadings_hash.hex();
    plan_projection.center = po.center;
    plan_projection.scale = project.options.scale;
    run.reduction.steps.push_back(StepRecord{"project", static_cast<std::int64_t>(r.kept.size()),
                                             static_cast<std::int64_t>(r.kept.size()), seconds_since(start_pca)});
  }
  if (project.selection_outputs && !bounded) {
    files.add("ranking.tsv", ranking_text.get());
    files.add("selection-log.tsv", log_text.get());
  }
  record.sample_screen_json = screen_section(run);
  record.more_outputs = {{"samples", "samples.tsv"}, {"report", "report.html"}};
  const nlohmann::json plan_document = internal::plan_document(run.table, r, options, record, plan_projection);
  const std::string plan = internal::plan_text(plan_document);
  files.add("plan.json", plan);
  files.add("samples.tsv", samples_tsv(run.screen, run.input_ids, run.input_labels, run.table.label_name, run.dropped,
                                       run.sample_info_names, run.sample_info));
  {
    report.command = project.selection_outputs ? "reduce" : "project";
    report.title = "pare " + report.command + ": " + std::filesystem::path(input.data).filename().string();
    report.samples = static_cast<std::int64_t>(run.input_ids.size());
    report.features = run.table.n_features();
    internal::add_plan_record(report, plan_document);
    auto& timings = report.record.timings;
    timings.insert(timings.begin() + (timings.empty() ? 0 : 1), {"sample screen", screen_seconds});
    add_reduction(report, run.table, r, options, project.selection_outputs);
    if (run.projection) {
      add_components(report, *run.projection,
                     project.selection_outputs
                         ? "the " + thousands(static_cast<std::int64_t>(r.kept.size())) + " kept features"
                         : "all " + thousands(run.table.n_features()) + " features (mean-filled)");
      if (!run.dropped.empty() && run.table.n_samples() < static_cast<std::int64_t>(run.input_ids.size())) {
        for (std::size_t i = 0; i < run.dropped.size(); ++i)
          if (!run.dropped[i]) report.components.sample_of.push_back(i);
        report.components.note = "The samples dropped as outliers (--drop-outliers) are not on these plots: the "
                                 "components were computed without them.";
      }
    }
    add_screen(report, run.screen, run.input_ids, run.input_labels, run.table.label_name, run.dropped);
    if (!run.marks.empty()) {
      report.sample_info.mark_name = input.mark_by;
      report.sample_info.marks = run.marks;
    }
    files.add("report.html", report_html(report));
  }
  files.commit();
  run.out_dir = common.out;

  if (!common.quiet) {
    out << "pare " << (project.selection_outputs ? "reduce" : "project") << ": " << run.table.source << " - "
        << thousands(run.table.n_samples()) << " samples x " << thousands(run.table.n_features()) << " features";
    if (project.selection_outputs)
      out << " -> " << thousands(static_cast<std::int64_t>(r.kept.size())) << " kept, ranked by "
          << criterion_name(r.criterion);
    out << "\n";
    print_left_out(out, run.left_out, run.samples_read, static_cast<std::int64_t>(run.input_ids.size()), input.samples);
    if (r.supervised) out << "  classes: " << class_counts_text(run.table) << "\n";
    print_steps(out, r, project.selection_outputs);
    if (project.selection_outputs && options.keep > 0 && static_cast<std::int64_t>(r.kept.size()) < options.keep)
      out << "  note: kept " << thousands(static_cast<std::int64_t>(r.kept.size())) << ", fewer than --keep "
          << options.keep << ": only so many features "
          << (r.supervised && options.fdr < 1 ? "passed --fdr " + short_number(options.fdr) + " and " : std::string())
          << "survived the filters and pruning\n";
    if (project.selection_outputs) {
      out << "  top:";
      for (std::size_t k = 0; k < names.size() && k < 10; ++k) out << (k ? ", " : " ") << names[k];
      out << (names.size() > 10 ? ", ...\n" : "\n");
    }
    if (run.projection) {
      const Projection& pr = *run.projection;
      out << "  PCA: " << pr.singular_values.size() << " components (" << pr.method << ", " << pr.precision
          << " products";
      if (pr.iterations > 0) out << ", " << pr.iterations << " blocks, residual " << short_number(pr.residual);
      out << "), explained variance";
      for (Eigen::Index c = 0; c < pr.ratio.size() && c < 5; ++c) out << (c ? ", " : " ") << percent(pr.ratio(c));
      out << (pr.ratio.size() > 5 ? ", ..." : "") << " (cumulative " << percent(pr.cumulative(pr.cumulative.size() - 1))
          << ")\n";
    }
    print_sample_screen(out, run.screen, run.input_ids, run.dropped);
    out << "  wrote " << files.path("plan.json");
    if (project.selection_outputs) out << ", ranking.tsv, selection-log.tsv, " << reduced_file_name(run.table.delimiter);
    if (run.projection) out << ", scores.csv, loadings.tsv, explained.tsv";
    out << ", samples.tsv, report.html\n";
  }
  return run;
}

void add_reduce_options(po::options_description& desc, ReduceOptions& o, std::string& impute, std::string& rank_by,
                        std::string& estimator, bool& no_missing, bool& no_variance, bool& no_prune) {
  desc.add_options()
      ("drop-missing-above", po::value(&o.drop_missing_above)->default_value(0.2, "0.2")->value_name("FRACTION"),
       "1. drop features missing in more than this fraction of the samples")
      ("no-missing-filter", po::bool_switch(&no_missing), "1. skip step 1")
      ("impute", po::value(&impute)->default_value("mean")->value_name("HOW"),
       "2. fill gaps with the feature's mean, median or zero")
      ("log2", po::bool_switch(&o.log2), "3. transform values to log2(x + 1)")
      ("scale", po::bool_switch(&o.scale), "3. z-score the kept features in the output")
      ("min-variance", po::value(&o.min_variance)->default_value(1e-8, "1e-08")->value_name("V"),
       "4. drop features with variance below V")
      ("drop-low-variance", po::value(&o.drop_low_variance)->default_value(0.0, "0")->value_name("FRACTION"),
       "4. also drop this lowest fraction by variance")
      ("no-variance-filter", po::bool_switch(&no_variance), "4. skip step 4")
      ("rank-by", po::value(&rank_by)->default_value("mi")->value_name("CRITERION"),
       "5. mi, chi2, chi2-counts, f or variance")
      ("fdr", po::value(&o.fdr)->default_value(1.0, "1")->value_name("Q"),
       "5. keep features with q <= Q for the ranking test")
      ("bins", po::value(&o.score.bins)->default_value(10)->value_name("B"), "5. equal-frequency bins for mi and chi2")
      ("mi-estimator", po::value(&estimator)->default_value("binned")->value_name("E"), "5. binned or knn")
      ("neighbors", po::value(&o.score.neighbors)->default_value(3)->value_name("k"), "5. k of the knn estimator")
      ("max-corr", po::value(&o.max_corr)->default_value(0.9, "0.9")->value_name("R"),
       "6. drop a feature whose |r| with a kept one is above R")
      ("no-prune", po::bool_switch(&no_prune), "6. skip step 6")
      ("keep", po::value(&o.keep)->default_value(0)->value_name("K"), "7. keep the first K survivors (0 = all)");
}

void finish_reduce_options(ReduceOptions& o, const std::string& impute, const std::string& rank_by,
                           const std::string& estimator, bool no_missing, bool no_variance, bool no_prune,
                           const CommonOptions& common) {
  o.impute = parse_impute(impute);
  o.rank_by = parse_criterion(rank_by);
  if (estimator == "knn") o.score.mi = MiEstimator::kKnn;
  else if (estimator != "binned") throw_usage_error("--mi-estimator " + estimator + " is not binned or knn");
  o.missing_filter = !no_missing;
  o.variance_filter = !no_variance;
  o.prune = !no_prune;
  o.threads = common.threads;
  check_reduce_options(o);
}

void check_projection_options(const ProjectionOptions& o, bool required) {
  if (o.components < (required ? 1 : 0))
    throw_usage_error(required ? "--components must be 1 or more" : "--components must be 0 (none) or more");
  if (!(o.tolerance > 0 && o.tolerance < 1)) throw_usage_error("--tolerance must be above 0 and below 1");
  if (o.max_iterations < 1) throw_usage_error("--max-iterations must be 1 or more");
}

}  // namespace

int command_reduce(const std::vector<std::string>& args, std::ostream& out) {
  CommonOptions common;
  InputOptions input;
  ReduceOptions options;
  std::string impute, rank_by, estimator;
  bool no_missing = false, no_variance = false, no_prune = false;
  po::options_description desc(
      "pare reduce DATA [--label COLUMN | --labels SHEET[:COLUMN]] --out DIR [options]\n\n"
      "Runs the reduction pipeline (steps 1-8 below, in order) and writes ranking.tsv,\n"
      "selection-log.tsv (one line per input feature: kept or dropped, by which step, why), the\n"
      "reduced matrix (reduced.csv, or reduced.tsv for tab-separated input), plan.json (replayable\n"
      "with pare apply), samples.tsv (per sample: label, missing rate, outlier distance and flag)\n"
      "and report.html (plots; open it in a browser).\n\nthe steps, in order",
      100, 50);
  ProjectSettings project;
  bool no_center = false;
  add_reduce_options(desc, options, impute, rank_by, estimator, no_missing, no_variance, no_prune);
  add_projection_options(desc, project.options, no_center, false);
  desc.add_options()("drop-outliers", po::bool_switch(&project.drop_outliers),
                     "remove the samples flagged as outliers (samples.tsv) before step 1");
  add_input_options(desc, input);
  add_sample_options(desc, input, true);
  add_common_options(desc, common, "pare-reduce");
  if (!parse_command_line(args, desc, {{"data", &input.data}}, out)) return 0;
  // Every option is checked before the data is read (a large file takes minutes).
  finish_reduce_options(options, impute, rank_by, estimator, no_missing, no_variance, no_prune, common);
  if (options.fdr < 1 && input.label.empty() && input.labels.empty())
    throw_usage_error("--fdr filters on a test against the labels, and no labels were given",
                      "give --label COLUMN or --labels SHEET, or leave out --fdr");
  project.options.center = !no_center;
  project.options.scale = options.scale;
  check_projection_options(project.options, false);
  check_input_options(input, common);
  std::vector<std::string> command_line{"pare", "reduce"};
  command_line.insert(command_line.end(), args.begin(), args.end());
  reduce_and_write(input, common, options, project, command_line, out);
  return 0;
}

int command_project(const std::vector<std::string>& args, std::ostream& out) {
  CommonOptions common;
  InputOptions input;
  ProjectSettings project;
  project.selection_outputs = false;
  bool no_center = false, log2 = false;
  po::options_description desc(
      "pare project DATA --components K --out DIR [options]\n\n"
      "Truncated PCA (centred; --scale for correlation PCA) or truncated SVD (--no-center) of every\n"
      "feature, no selection. Gaps are filled with the feature's mean first. Writes scores.csv,\n"
      "loadings.tsv, explained.tsv, plan.json (pare apply projects new samples with it),\n"
      "samples.tsv and report.html.\n\nthe projection",
      100, 50);
  desc.add_options()("log2", po::bool_switch(&log2), "analyse log2(x + 1) of the values, as reduce --log2 does")
      ("scale", po::bool_switch(&project.options.scale), "divide each centred feature by its sd");
  add_projection_options(desc, project.options, no_center, true);
  desc.add_options()("drop-outliers", po::bool_switch(&project.drop_outliers),
                     "remove the samples flagged as outliers (samples.tsv) before the PCA");
  add_input_options(desc, input);
  add_sample_options(desc, input, false);
  add_common_options(desc, common, "pare-project");
  if (!parse_command_line(args, desc, {{"data", &input.data}}, out)) return 0;
  project.options.center = !no_center;
  check_projection_options(project.options, true);
  check_input_options(input, common);
  ReduceOptions options;  // every selection step off: all features, input order, mean-filled
  options.missing_filter = false;
  options.variance_filter = false;
  options.relevance = false;
  options.prune = false;
  options.log2 = log2;
  options.threads = common.threads;
  std::vector<std::string> command_line{"pare", "project"};
  command_line.insert(command_line.end(), args.begin(), args.end());
  reduce_and_write(input, common, options, project, command_line, out);
  return 0;
}

namespace {

std::string join_names(const std::vector<std::string>& names) {
  std::string out;
  for (const auto& n : names) out += (out.empty() ? "" : ",") + n;
  return out;
}

// samples.tsv of an apply run: the new samples' ids, labels and --sample-info columns (apply
// screens nothing, so only what was read).
std::string applied_samples_tsv(const FeatureTable& t) {
  std::string out = "sample";
  if (t.has_labels()) out += '\t' + (t.label_name.empty() ? std::string("label") : t.label_name);
  for (const auto& name : t.sample_info_names) out += '\t' + name;
  out += '\n';
  for (std::size_t i = 0; i < t.sample_ids.size(); ++i) {
    out += t.sample_ids[i];
    if (t.has_labels()) out += '\t' + (t.labels[i].empty() ? std::string("NA") : t.labels[i]);
    for (const auto& column : t.sample_info) out += '\t' + column[i];
    out += '\n';
  }
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
  // The plan's label column is read when the new data has it; new samples often have none.
  if (!given("label") && !given("labels")) {
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

  const FeatureTable data = load_table(input, common);
  ApplyReport report;
  const FeatureTable reduced = apply_plan(plan, data, allow_missing, report, common.threads);

  std::string log = "feature\tstatus\tfilled_cells\n";
  for (std::size_t i = 0; i < plan.names.size(); ++i) {
    const bool absent = std::find(report.absent.begin(), report.absent.end(), plan.names[i]) != report.absent.end();
    log += plan.names[i] + '\t' + (absent ? "absent: filled with the training value" : "present") + '\t' +
           std::to_string(report.filled[i]) + '\n';
  }
  std::vector<std::string> inputs{input.data, plan_path};
  if (!input.samples.empty()) inputs.push_back(input.samples);
  OutputSet files(common.out, inputs);
  const std::string reduced_name = reduced_file_name(reduced.delimiter);
  files.add(reduced_name, reduced_matrix_text(reduced, [&] {
              std::vector<std::int64_t> all(plan.names.size());
              for (std::size_t i = 0; i < all.size(); ++i) all[i] = static_cast<std::int64_t>(i);
              return all;
            }(), plan.names));
  files.add("apply-log.tsv", log);
  const bool per_sample = reduced.has_labels() || !reduced.sample_info.empty();
  if (per_sample) files.add("samples.tsv", applied_samples_tsv(reduced));
  if (plan.components > 0)
    files.add("scores.csv",
              scores_csv(project_rows(reduced.values, plan.pca_center, plan.pca_scale, plan.loadings), reduced.sample_ids));
  files.commit();
  if (!common.quiet) {
    std::int64_t filled = 0;
    for (auto f : report.filled) filled += f;
    const auto present = static_cast<std::int64_t>(plan.names.size() - report.absent.size());
    out << "pare apply: " << data.source << " - " << thousands(data.n_samples()) << " samples, "
        << thousands(present) << " of the plan's " << thousands(static_cast<std::int64_t>(plan.names.size()))
        << " features present (" << thousands(report.extra) << " other features ignored)\n";
    out << "  filled " << thousands(filled) << " missing cells with training values";
    if (!report.absent.empty())
      out << "; " << report.absent.size() << (report.absent.size() == 1 ? " feature" : " features")
          << " absent from the data, filled entirely (see apply-log.tsv)";
    out << "\n  wrote " << files.path(reduced_name) << ", apply-log.tsv";
    if (per_sample) out << ", samples.tsv";
    if (plan.components > 0) out << ", scores.csv (" << plan.components << " components)";
    out << "\n";
  }
  return 0;
}

namespace {

// The share of each component's variance that lies between the groups of `groups` (one per row of
// `scores`; eta squared = between-group sum of squares / total sum of squares): near 0, the
// grouping does not show on the component; near 1, the component is the grouping.
std::vector<double> between_group_share(const Eigen::MatrixXd& scores, const std::vector<std::string>& groups) {
  std::vector<double> share;
  if (static_cast<Eigen::Index>(groups.size()) != scores.rows() || scores.rows() < 2) return share;
  std::map<std::string, std::pair<double, std::int64_t>> sums;
  for (Eigen::Index c = 0; c < scores.cols(); ++c) {
    sums.clear();
    const double mean = scores.col(c).mean();
    double total = 0;
    for (Eigen::Index i = 0; i < scores.rows(); ++i) {
      auto& [sum, count] = sums[groups[static_cast<std::size_t>(i)]];
      sum += scores(i, c);
      ++count;
      total += (scores(i, c) - mean) * (scores(i, c) - mean);
    }
    double between = 0;
    for (const auto& [name, sc] : sums) {
      const double d = sc.first / static_cast<double>(sc.second) - mean;
      between += static_cast<double>(sc.second) * d * d;
    }
    share.push_back(total > 0 ? between / total : 0.0);
  }
  return share;
}

std::string shares_text(const std::vector<double>& share) {
  std::string out;
  for (std::size_t c = 0; c < share.size(); ++c) out += (c ? ", PC" : "PC") + std::to_string(c + 1) + " " + fixed(share[c], 2);
  return out;
}

}  // namespace

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
  ProjectSettings project;
  project.options.components = 3;
  const ReduceRun run = reduce_and_write(input, reduce_common, options, project, command_line, out);
  const DemoRecovery d = evaluate_demo(truth, run.table, run.reduction);
  if (!common.quiet) {
    out << "\nplanted truth (" << truth << "):\n";
    out << "  informative transcripts kept   " << d.informative_kept << " of " << d.informative
        << " (recall " << fixed(d.informative ? static_cast<double>(d.informative_kept) / static_cast<double>(d.informative) : 0, 2)
        << ")\n";
    out << "  kept that are informative      " << d.kept_planted << " of " << d.kept << " (precision "
        << fixed(d.kept ? static_cast<double>(d.kept_planted) / static_cast<double>(d.kept) : 0, 2)
        << "; the rest are background picked to fill --keep 200)\n";
    out << "  near-copies dropped redundant  " << d.copies_redundant << " of " << d.copies << " ("
        << d.copies_named_twin << " naming their original or a module-mate)\n";
    out << "  (near-)constant by variance    " << d.near_constant_variance << " of " << d.near_constant << "\n";
    out << "  mostly-missing by missing      " << d.mostly_missing_missing << " of " << d.mostly_missing << "\n";
    // The planted batch shift: how much of each component lies between the two batches.
    if (run.screen.done)
      out << "  batch shift, share of variance between batches: " << shares_text(between_group_share(run.screen.scores, run.marks))
          << " on the screen's PCA of all transcripts";
    if (run.projection)
      out << "; " << shares_text(between_group_share(run.projection->scores, run.marks)) << " on the 200 kept";
    out << "\n  (colour by batch in the report: reduce --mark-by batch)\n";
    out << "\nreport: " << join_path(reduce_common.out, "report.html") << " (open it in a browser)\n";
  }
  return 0;
}

std::string class_counts_text(const FeatureTable& table) {
  const ClassCodes codes = encode_classes(table.labels);
  std::string text = (table.label_name.empty() ? std::string("label") : table.label_name) + " -";
  for (std::size_t c = 0; c < codes.classes.size() && c < 12; ++c)
    text += (c ? ", " : " ") + codes.classes[c] + " " + thousands(codes.counts[c]);
  if (codes.classes.size() > 12) text += ", ... (" + thousands(static_cast<std::int64_t>(codes.classes.size())) + " classes)";
  return text;
}

void print_left_out(std::ostream& out, const SamplesLeftOut& left, std::int64_t samples_read, std::int64_t samples_used,
                    const std::string& sample_list) {
  if (left.empty() && samples_used == samples_read) return;
  out << "  samples: " << thousands(samples_used) << " of " << thousands(samples_read) << " used";
  std::string why;
  const auto listed = samples_used + static_cast<std::int64_t>(left.unlabelled.size() + left.small_class.size());
  if (!sample_list.empty()) why += thousands(listed) + " listed in " + sample_list;
  if (!left.unlabelled.empty())
    why += (why.empty() ? "" : "; ") + thousands(static_cast<std::int64_t>(left.unlabelled.size())) + " without a label left out";
  if (!left.small_class.empty()) {
    why += (why.empty() ? "" : "; ") + thousands(static_cast<std::int64_t>(left.small_class.size())) +
           " in classes under --min-class-size " + std::to_string(left.min_class_size) + " left out (";
    for (std::size_t k = 0; k < left.small_classes.size(); ++k) why += (k ? ", " : "") + left.small_classes[k];
    why += ")";
  }
  out << (why.empty() ? "" : " (" + why + "; plan.json lists the ids left out)") << "\n";
}

void print_sample_screen(std::ostream& out, const SampleScreen& screen, const std::vector<std::string>& ids,
                         const std::vector<char>& dropped, const std::string& label) {
  const std::int64_t n = static_cast<std::int64_t>(ids.size());
  if (!screen.done) {
    out << label << "not screened for outliers: " << screen.reason << "\n";
    return;
  }
  const std::vector<std::int64_t> flagged = screen.flagged();
  out << label << (flagged.empty() ? "none" : thousands(static_cast<std::int64_t>(flagged.size()))) << " of "
      << thousands(n) << " samples flagged as outliers (robust distance > " << short_number(screen.robust.threshold) << " on "
      << screen.scores.cols() << " screening components)";
  if (flagged.empty()) {
    out << "\n";
    return;
  }
  bool any_dropped = false;
  for (const char d : dropped) any_dropped = any_dropped || d;
  out << (any_dropped ? " and dropped before the reduction: " : ": ");
  for (std::size_t k = 0; k < flagged.size() && k < 20; ++k) out << (k ? ", " : "") << ids[static_cast<std::size_t>(flagged[k])];
  if (flagged.size() > 20) out << ", ... (samples.tsv lists all)";
  out << (any_dropped ? "\n" : "; kept (--drop-outliers removes them)\n");
}

}  // namespace pare::cli
