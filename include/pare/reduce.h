// The reduction pipeline (SPEC §4 steps 1-7): missing filter, imputation, transform, variance
// filter, relevance, correlation pruning, top K. Every decision is recorded per input feature.
#pragma once

#include <cstdint>      // std::int64_t
#include <functional>   // std::function
#include <optional>     // std::optional
#include <span>         // std::span
#include <string_view>  // std::string_view
#include <string>   // std::string
#include <vector>   // std::vector

#include "pare/clean.h"
#include "pare/impute.h"
#include "pare/matrix.h"
#include "pare/prune.h"
#include "pare/ranking.h"
#include "pare/stability.h"
#include "pare/stats.h"

namespace pare {

/// How gaps are filled; the fill values are learned on the training data and kept in the plan.
/// kKnn: each gap from its k nearest training samples (pare/impute.h), the mean as the fallback.
enum class Impute { kMean, kMedian, kZero, kKnn };

Impute parse_impute(const std::string& name);
const char* impute_name(Impute i);

struct ReduceOptions {
  /// Before step 1 (SPEC §9): keep a feature only when at least floor_samples samples have a raw
  /// value >= count_floor (floor_samples 0: no floor); then normalise every sample.
  double count_floor = 0;
  std::int64_t floor_samples = 0;
  Normalize normalize = Normalize::kNone;
  bool missing_filter = true;
  double drop_missing_above = 0.2;   ///< drop features whose missing rate is above this
  Impute impute = Impute::kMean;
  int impute_neighbors = 5;          ///< k of --impute knn
  bool log2 = false;                 ///< log2(x + 1); negative input is an error
  bool scale = false;                ///< z-score the kept features (used by PCA and the output)
  bool variance_filter = true;
  double min_variance = 1e-8;        ///< drop features with sample variance below this
  double drop_low_variance = 0;      ///< also drop this lowest fraction by variance, in [0, 1)
  bool relevance = true;             ///< rank: by the label's scores, or by variance without labels;
                                     ///< false keeps the input order
  Criterion rank_by = Criterion::kMi;
  double fdr = 1;                    ///< keep q <= fdr for the ranking test (1 = no filter)
  ScoreOptions score;
  bool prune = true;
  double max_corr = 0.9;
  std::int64_t keep = 0;             ///< keep the first K (0 = all survivors)
  int threads = 0;
  std::int64_t memory_budget = 0;    ///< bytes the pruning's kept set may use (0 = no limit)
  std::uint64_t seed = 1;            ///< of every random draw of the selection (subsets, balancing)
  /// kSmallest: the scores (step 5, and each stability subset's) use every class down-sampled to
  /// the smallest class's size (balance_rows); classes only.
  Balance balance = Balance::kNone;
  /// With resamples > 0, steps 6-7 become stability selection (select_stable): keep is then q,
  /// the features each subset keeps, and --fdr applies within each subset.
  StabilityOptions stability;
};

/// Checks the option values (ranges, combinations) without any data, so a mistake shows before a
/// long read. Throws Error(kUsage) naming the option.
void check_reduce_options(const ReduceOptions& options);

/// Replaces every observed value of `table` by log2(x + 1) (transform_value), as reduce --log2 does
/// for the features it keeps. Throws Error(kInput) naming the first feature (in file order) with a
/// negative value.
void log2_transform(FeatureTable& table, int threads = 0);

/// Throws Error(kInput) when not one feature of `scores` has a defined score for `criterion`
/// (criterion_defined): such a ranking would only be the input order.
void require_some_scored(const FeatureScores& scores, Criterion criterion, const std::string& source);

/// The steps of a run, in order (SPEC §4): reading, the selection steps 1-7 and the projection.
enum class Step : std::uint8_t {
  kRead,
  kFloor,       ///< count floor (--count-floor, --floor-samples), on the raw values
  kNormalize,   ///< per-sample normalisation (--normalize)
  kMissing,     ///< 1. missing-rate filter
  kImpute,      ///< 2. fill values learned
  kTransform,   ///< 3. log2(x + 1)
  kVariance,    ///< 4. variance filter
  kRelevance,   ///< 5. ranking (and the --fdr cut)
  kStability,   ///< stability selection (--resamples): kept in too few subsets
  kRedundancy,  ///< 6. correlation pruning
  kTop,         ///< 7. the first K
  kProject,     ///< 8. truncated PCA / SVD
};

/// The step's name as the outputs write it: read, floor, normalize, missing, impute, transform, variance,
/// relevance, stability, redundancy, top, project.
const char* step_name(Step step);

/// What a step did: features in and out, and its wall time.
struct StepRecord {
  Step step = Step::kRead;
  std::int64_t in = 0;
  std::int64_t out = 0;
  double seconds = 0;
};

/// The decision about one input feature.
struct Decision {
  bool kept = false;
  Step step = Step::kRead;  ///< the step that dropped it (kTop for a kept feature)
  std::string reason;       ///< in words, for a person
  std::int64_t rank = 0;                ///< final rank when kept
  std::int64_t partner = -1;            ///< redundancy: the input index of the kept twin
};

/// What the selection steps share: the features still in the running and a decision for every
/// input feature. Indices are input feature (column) indices.
struct Selection {
  std::vector<std::int64_t> alive;       ///< still in the running, in the current order
  std::vector<std::int64_t> unexamined;  ///< after pruning stopped at --keep: not compared (step 7 drops them)
  std::vector<Decision> decisions;       ///< per input feature
  std::vector<StepRecord> steps;         ///< per step run so far

  /// Marks input feature `j` dropped by `step`, with the reason in words (it must also leave `alive`).
  void drop(std::int64_t j, Step step, std::string reason);
};

/// The result of a reduction: the selection and what the steps learned on the way.
struct Reduction : Selection {
  std::vector<std::int64_t> kept;     ///< in final order
  std::vector<float> fill;            ///< per input feature: the fill value learned (raw scale)
  std::vector<double> center, scale;  ///< per kept feature: mean and sd of the transformed column
  std::vector<ColumnStats> raw_stats; ///< per input feature, before any transform
  std::vector<ColumnStats> stats;     ///< per input feature: of the transformed observed values
  std::vector<double> variance;       ///< per input feature: the variance the filter saw (NaN if none)
  FeatureScores scores;               ///< the features that were scored (supervised runs)
  std::vector<std::int64_t> score_of; ///< per input feature: position in `scores`, or -1
  bool supervised = false;
  Criterion criterion = Criterion::kVariance;
  std::optional<StabilityRecord> stability;  ///< with options.stability.resamples > 0
  std::vector<std::int64_t> scored_rows;     ///< with --balance: the rows step 5 scored (else all)
  /// --impute knn: the training values the fills come from (written beside the plan), and per
  /// input feature the fills of its gaps (learn_knn_fills; empty for features not filled).
  std::shared_ptr<const KnnReference> knn;
  std::vector<CellFills> cell_fills;
  std::vector<std::int64_t> normalized;  ///< --normalize: the features normalised (those past the floor)
  std::vector<double> quantile_reference;  ///< --normalize quantile: learned on these samples, ascending
};

/// The steps, each a plain function of the table, the options and the reduction so far; reduce()
/// runs them in order, and a caller may run them one by one (each records its StepRecord). The
/// table's values change in place: transformed (step 3), gaps of the ranked candidates filled
/// (before step 6), the kept columns standardised with options.scale (step 7).
Reduction start_reduction(const FeatureTable& table, const ReduceOptions& options);
void filter_floor(const FeatureTable& table, const ReduceOptions& options, Reduction& r);       ///< floor
void normalize_step(FeatureTable& table, const ReduceOptions& options, Reduction& r);          ///< normalize
void filter_missing(const FeatureTable& table, const ReduceOptions& options, Reduction& r);   ///< 1
void learn_fill(const FeatureTable& table, const ReduceOptions& options, Reduction& r);       ///< 2
void transform_step(FeatureTable& table, const ReduceOptions& options, Reduction& r);         ///< 3
void filter_variance(const FeatureTable& table, const ReduceOptions& options, Reduction& r);  ///< 4
void rank_relevance(const FeatureTable& table, const ReduceOptions& options, Reduction& r);   ///< 5
void prune_redundant(FeatureTable& table, const ReduceOptions& options, Reduction& r);        ///< 6
void take_top(FeatureTable& table, const ReduceOptions& options, Reduction& r);               ///< 7
/// With --impute knn, after step 5: the reference (the transformed values of the features that
/// passed step 1) and the fills of the gaps of the features still in the running.
void learn_knn_fills(const FeatureTable& table, const ReduceOptions& options, Reduction& r);
// With options.stability.resamples > 0, select_stable (pare/stability.h) takes the place of 6 and 7.

/// The column operations the steps apply, shared with apply_plan and the sample screen so that a
/// replay computes every value the same way.
/// Step 3 on one column: log2(x + 1) of every observed value (gaps stay gaps).
void transform_column(std::span<float> x, bool log2);
/// Fills every gap of `x` with transform_value(raw_fill, log2); returns how many.
std::int64_t fill_column(std::span<float> x, float raw_fill, bool log2);
/// (x - center) / scale, computed in double.
void standardise_column(std::span<float> x, double center, double scale);

/// A value as the transform sees it: log2(x + 1) when `log2`, else x (in double, stored as float).
float transform_value(float x, bool log2);

/// Steps 1-7 (or stability selection) on a reduction already started and cleaned
/// (start_reduction, filter_floor, normalize_step): reduce() without its start.
void reduce_steps(FeatureTable& table, const ReduceOptions& options, Reduction& r);

/// Runs the pipeline on `table` (labels used when present and options.relevance). The kept columns
/// of table.values are left imputed, transformed and (with options.scale) standardised; other
/// columns may be changed too. Throws Error when every feature is filtered out.
Reduction reduce(FeatureTable& table, const ReduceOptions& options);

/// selection-log.tsv: one line per input feature.
std::string selection_log_tsv(const FeatureTable& table, const Reduction& r);

/// ranking.tsv of the kept features in final order.
std::string reduction_ranking_tsv(const FeatureTable& table, const Reduction& r);

/// The reduced matrix's file name for a delimiter: reduced.tsv for tab, reduced.csv otherwise.
const char* reduced_file_name(char delimiter);

/// The kept columns of `table` as delimited text in the table's layout and delimiter: ids and
/// numbers only (the header's first field is the id column's name; no label column or line).
std::string reduced_matrix_text(const FeatureTable& table, const std::vector<std::int64_t>& columns,
                                const std::vector<std::string>& names);

/// The same text handed to `sink` in pieces of about a megabyte, so a large matrix is never held
/// whole as text.
void write_reduced_matrix(const FeatureTable& table, const std::vector<std::int64_t>& columns,
                          const std::vector<std::string>& names,
                          const std::function<void(std::string_view)>& sink);

}  // namespace pare
