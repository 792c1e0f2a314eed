// One reduction run as one call: the sample screen of the input, the selection steps of reduce.h
// and the projection of the kept features, with a record per step. Its writers (run_files.h:
// plan.json, report.html, the selection log, the reduced matrix, the summary) render that one
// result.
#pragma once

#include <cstdint>     // std::int64_t, std::uint64_t
#include <functional>  // std::function
#include <optional>    // std::optional
#include <string>      // std::string
#include <vector>      // std::vector

#include "pare/matrix.h"
#include "pare/outliers.h"
#include "pare/projection.h"
#include "pare/reduce.h"
#include "pare/sampling.h"

namespace pare {

struct PipelineOptions {
  ReduceOptions reduce;
  /// false: every selection step off (all features, input order, mean-filled), for a projection
  /// of every feature; no ranking, selection log or reduced matrix is written.
  bool select = true;
  ProjectionOptions projection = [] {
    ProjectionOptions none;
    none.components = 0;
    return none;
  }();                           ///< components 0 (the default): no projection
  bool drop_outliers = false;    ///< remove the samples the screen flags before step 1
  /// Leave out, first of all, the samples missing more than this fraction of their values
  /// (drop_sparse_samples; 1 = none).
  double drop_samples_missing_above = 1;
  /// Also write a class-balanced copy of the reduced matrix for training (reduce_to_folder:
  /// balanced.csv and balanced-samples.tsv; balanced_samples). apply never balances.
  BalanceExport balance_export = BalanceExport::kNone;
  std::uint64_t seed = 1;
  int threads = 0;
  MemoryBudget memory;           ///< for a copy of the kept columns when the table is on disk
};

/// The samples of the input as the run received them, before the screen dropped any.
struct RunSamples {
  std::vector<std::string> ids, labels;
  std::vector<double> target;                   ///< a continuous target, one per id (labels then empty)
  std::string label_name;                       ///< of the labels or the target

  std::vector<std::string> info_names;          ///< --sample-info columns
  std::vector<std::vector<std::string>> info;
  std::vector<char> dropped;                    ///< per input sample: dropped as an outlier (or empty)
  bool any_dropped() const;
};

struct PipelineResult {
  PipelineOptions options;               ///< as run (the projection's scale may differ, see below)
  Reduction reduction;                   ///< steps: read, 1-7, and project when there is one
  std::optional<Projection> projection;  ///< loadings, centres and scales in the kept order
  bool projection_center = true, projection_scale = false;  ///< as asked (plan.json replays them)
  /// With balance_export: the balanced set written (reduce_to_folder fills it).
  struct Balanced {
    std::string file;                                            ///< balanced.csv or balanced.tsv
    std::vector<std::pair<std::string, std::int64_t>> per_class; ///< samples per class, classes in name order
    std::int64_t samples = 0, repeated = 0, synthetic = 0;
  };
  std::optional<Balanced> balanced;
  /// Samples left out for missing more than drop_samples_missing_above, with their missing rates.
  std::vector<std::pair<std::string, double>> sparse_samples;
  SampleScreen screen;                   ///< of every input sample
  double screen_seconds = 0;
  RunSamples samples;
};

/// Called once the selection is done and before the projection, which may use the table's matrix
/// as its workspace: the last moment the kept columns hold what the reduced matrix holds.
using SelectionDone = std::function<void(const FeatureTable& table, const PipelineResult& result)>;

/// Leaves out the samples missing too much (drop_samples_missing_above), applies the count floor
/// and the normalisation, screens the samples of `table` (on log2(x + 1) with options.reduce.log2, each sample measured
/// from its class when there are labels), drops the flagged ones with drop_outliers, runs the
/// selection steps and, with projection.components > 0, the truncated PCA of the kept features.
/// `read_seconds` becomes the record of step "read". The table's values are used up (see
/// SelectionDone). Throws Error as the steps do, and Error(kInput) when more components are asked
/// for than the kept features and samples allow.
PipelineResult run_pipeline(FeatureTable& table, const PipelineOptions& options, double read_seconds = 0,
                            const SelectionDone& selection_done = {});
/// The same into `result`, which stays where it is while the steps run (`selection_done` may hand
/// references into it to work that outlives the call).
void run_pipeline(FeatureTable& table, const PipelineOptions& options, PipelineResult& result, double read_seconds,
                  const SelectionDone& selection_done);

/// For each column of `scores`, the share of its variance that lies between the groups of
/// `groups` (one per row; eta squared = between-group / total sum of squares): near 0 the grouping
/// does not show on the component, near 1 the component is the grouping. Empty when the sizes
/// differ or there are fewer than 2 rows.
std::vector<double> between_group_share(const Eigen::MatrixXd& scores, const std::vector<std::string>& groups);

}  // namespace pare
