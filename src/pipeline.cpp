#include "pare/pipeline.h"

#include <algorithm>  // std::copy, std::copy_n, std::min
#include <chrono>     // std::chrono::steady_clock
#include <map>        // std::map
#include <string>     // std::to_string
#include <utility>    // std::move, std::pair

#include "internal/omp.h"
#include "internal/columns.h"
#include "pare/error.h"
#include "pare/load.h"
#include "pare/samples.h"

namespace pare {

namespace {

double seconds_since(std::chrono::steady_clock::time_point start) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
}

// Screens every input sample and, with drop_outliers, removes the flagged ones from `table`.
void screen_step(FeatureTable& table, const PipelineOptions& options, PipelineResult& result) {
  const auto start = std::chrono::steady_clock::now();
  ScreenOptions screen;
  screen.log2 = options.reduce.log2;
  screen.seed = options.seed;
  screen.threads = options.threads;
  // With labels, each sample is measured from its own class (classes are meant to separate).
  result.screen = screen_samples(table.values, screen, encode_classes(table.labels).codes);
  RunSamples& s = result.samples;
  s.ids = table.sample_ids;
  s.labels = table.labels;
  s.target = table.target;
  s.label_name = table.label_name;
  s.info_names = table.sample_info_names;
  s.info = table.sample_info;
  if (options.drop_outliers) {
    s.dropped = result.screen.robust.flagged;
    s.dropped.resize(s.ids.size(), 0);
    if (s.any_dropped()) {
      std::vector<std::int64_t> rows;
      for (std::size_t i = 0; i < s.dropped.size(); ++i)
        if (!s.dropped[i]) rows.push_back(static_cast<std::int64_t>(i));
      keep_samples(table, rows, options.memory);
    }
  }
  result.screen_seconds = seconds_since(start);
}

// The truncated PCA of the kept columns. They are analysed in file order, so the data and any
// copy are both walked front to back (on disk, in rank order nearly every column would map and
// drop a whole window of the cache file); the loadings, centres and scales are put back in rank
// order afterwards.
Projection project_kept(FeatureTable& table, const std::vector<std::int64_t>& kept, const ProjectionOptions& po,
                        const PipelineOptions& options) {
  const std::vector<std::size_t> by_file = internal::file_order(kept);
  bool identity = static_cast<std::int64_t>(kept.size()) == table.n_features();
  for (std::size_t k = 0; identity && k < by_file.size(); ++k) identity = kept[by_file[k]] == static_cast<std::int64_t>(k);
  Projection p;
  if (identity) {
    // Every feature: the matrix in place, no copy.
    p = truncated_pca(table.values, po);
  } else if (!table.values.on_disk()) {
    // In memory the kept columns are moved to the front of the table's own matrix, in file order,
    // and analysed there (nothing after the selection reads the values; a fresh copy would cost as
    // much memory again). Each column moves to a place at or before its own, and the places are
    // taken in increasing order, so no column is overwritten before it has moved.
    const Eigen::Index n = table.n_samples();
    float* const base = table.values.data();
    for (std::size_t k = 0; k < by_file.size(); ++k) {
      const auto from = static_cast<Eigen::Index>(kept[by_file[k]]), to = static_cast<Eigen::Index>(k);
      if (from != to) std::copy_n(base + from * n, n, base + to * n);
    }
    Eigen::Map<Matrix> front(base, n, static_cast<Eigen::Index>(by_file.size()));
    p = truncated_pca(front, po);
  } else {
    // On disk: a copy, itself on disk when it would take more than half the budget.
    MemoryBudget budget = options.memory;
    if (budget.bytes > 0) budget.bytes = std::max<std::int64_t>(1, budget.bytes / 2);
    Columns copy;
    copy.allocate(table.n_samples(), static_cast<Eigen::Index>(kept.size()), budget);
    const bool on_disk = table.values.on_disk() || copy.on_disk();
#pragma omp parallel num_threads(internal::thread_count(options.threads)) if (!on_disk)
    {
      const auto bytes = static_cast<std::size_t>(table.n_samples()) * sizeof(float);
      internal::WindowWalk from_walk(bytes), to_walk(bytes);
#pragma omp for schedule(static)
      for (std::size_t k = 0; k < by_file.size(); ++k) {
        const float* from = table.values.col(kept[by_file[k]]).data();
        float* to = copy.col(static_cast<Eigen::Index>(k)).data();
        std::copy(from, from + table.n_samples(), to);
        from_walk.visited(from);
        to_walk.visited(to);
      }
    }
    p = truncated_pca(copy, po);
  }
  if (!p.converged)
    throw Error(ErrorKind::kOther, p.status + "; ask for fewer components or raise `max_iterations`");
  const Eigen::MatrixXd loadings = p.loadings;
  const Eigen::VectorXd center = p.center, scale = p.scale;
  for (std::size_t k = 0; k < by_file.size(); ++k) {
    const auto rank = static_cast<Eigen::Index>(by_file[k]), at = static_cast<Eigen::Index>(k);
    p.loadings.row(rank) = loadings.row(at);
    p.center(rank) = center(at);
    p.scale(rank) = scale(at);
  }
  return p;
}

}  // namespace

bool RunSamples::any_dropped() const {
  return std::find(dropped.begin(), dropped.end(), char{1}) != dropped.end();
}

PipelineResult run_pipeline(FeatureTable& table, const PipelineOptions& options, double read_seconds,
                            const SelectionDone& selection_done) {
  PipelineResult result;
  run_pipeline(table, options, result, read_seconds, selection_done);
  return result;
}

void run_pipeline(FeatureTable& table, const PipelineOptions& options, PipelineResult& result, double read_seconds,
                  const SelectionDone& selection_done) {
  result = PipelineResult{};
  result.options = options;
  ReduceOptions& reduce_options = result.options.reduce;
  if (!options.select) {
    // every selection step off: all features, input order, mean-filled
    reduce_options.missing_filter = false;
    reduce_options.variance_filter = false;
    reduce_options.relevance = false;
    reduce_options.prune = false;
    reduce_options.fdr = 1;
    reduce_options.keep = 0;
    reduce_options.stability.resamples = 0;
  }
  reduce_options.threads = options.threads;
  reduce_options.seed = options.seed;
  reduce_options.memory_budget = options.memory.bytes;
  if (!(options.drop_samples_missing_above >= 0 && options.drop_samples_missing_above <= 1))
    throw_usage_error("`drop_samples_missing_above` must be between 0 and 1 (a fraction of the features)");
  if (options.drop_samples_missing_above < 1)
    result.sparse_samples = drop_sparse_samples(table, options.drop_samples_missing_above, options.memory);
  // The floor and the normalisation come before the screen, so it sees the samples on one scale.
  result.reduction = start_reduction(table, reduce_options);
  Reduction& r = result.reduction;
  filter_floor(table, reduce_options, r);
  normalize_step(table, reduce_options, r);
  screen_step(table, options, result);
  if (table.has_labels() && reduce_options.relevance) require_two_classes(table);
  reduce_steps(table, reduce_options, r);
  r.steps.insert(r.steps.begin(), StepRecord{Step::kRead, table.n_features(), table.n_features(), read_seconds});
  if (selection_done) selection_done(table, result);

  if (options.projection.components > 0) {
    const auto start = std::chrono::steady_clock::now();
    const auto kept = static_cast<std::int64_t>(r.kept.size());
    const auto most = std::min<std::int64_t>(table.n_samples(), kept);
    if (options.projection.components > most)
      throw Error(ErrorKind::kInput, table.source + ": `components` " + std::to_string(options.projection.components) +
                                         " asks for more than " + std::to_string(kept) + " kept feature" +
                                         (kept == 1 ? "" : "s") + " and " + std::to_string(table.n_samples()) +
                                         " samples allow (at most " + std::to_string(most) +
                                         "; ask for fewer, or keep more features)");
    ProjectionOptions po = options.projection;
    po.scale = reduce_options.scale ? false : options.projection.scale;  // --scale already standardised them
    po.seed = options.seed;
    po.threads = options.threads;
    result.projection_center = po.center;
    result.projection_scale = options.projection.scale;
    result.projection = project_kept(table, r.kept, po, options);
    r.steps.push_back(StepRecord{Step::kProject, kept, kept, seconds_since(start)});
  }
}

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

}  // namespace pare
