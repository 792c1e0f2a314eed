// The reduction pipeline (SPEC §4 steps 1-7): missing filter, imputation, transform, variance
// filter, relevance, correlation pruning, top K. Every decision is recorded per input feature.
#pragma once

#include <cstdint>      // std::int64_t
#include <functional>   // std::function
#include <string_view>  // std::string_view
#include <string>   // std::string
#include <vector>   // std::vector

#include "pare/matrix.h"
#include "pare/prune.h"
#include "pare/ranking.h"
#include "pare/stats.h"

namespace pare {

/// How gaps are filled; the fill values are learned on the training data and kept in the plan.
enum class Impute { kMean, kMedian, kZero };

Impute parse_impute(const std::string& name);
const char* impute_name(Impute i);

struct ReduceOptions {
  bool missing_filter = true;
  double drop_missing_above = 0.2;   ///< drop features whose missing rate is above this
  Impute impute = Impute::kMean;
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

/// What a step did: features in and out, and its wall time.
struct StepRecord {
  std::string name;
  std::int64_t in = 0;
  std::int64_t out = 0;
  double seconds = 0;
};

/// The decision about one input feature.
struct Decision {
  bool kept = false;
  std::string step;    ///< the step that decided: missing, variance, relevance, redundancy, top
  std::string reason;  ///< in words, for a person
  std::int64_t rank = 0;                ///< final rank when kept
  std::int64_t partner = -1;            ///< redundancy: the input index of the kept twin
};

/// The result of a reduction. Indices are input feature (column) indices.
struct Reduction {
  std::vector<std::int64_t> kept;     ///< in final order
  std::vector<float> fill;            ///< per input feature: the fill value learned (raw scale)
  std::vector<double> center, scale;  ///< per kept feature: mean and sd of the transformed column
  std::vector<Decision> decisions;    ///< per input feature
  std::vector<ColumnStats> raw_stats; ///< per input feature, before any transform
  std::vector<double> variance;       ///< per input feature: the variance the filter saw (NaN if none)
  FeatureScores scores;               ///< the features that were scored (supervised runs)
  std::vector<std::int64_t> score_of; ///< per input feature: position in `scores`, or -1
  std::vector<StepRecord> steps;
  bool supervised = false;
  Criterion criterion = Criterion::kVariance;
};

/// A value as the transform sees it: log2(x + 1) when `log2`, else x (in double, stored as float).
float transform_value(float x, bool log2);

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
