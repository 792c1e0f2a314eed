// The scores of one feature against class codes: the per-feature work of score_features, and the
// same for a subset of the rows (the resamples of stability selection), which takes the feature's
// sort of all rows instead of sorting again. Private to the library.
#pragma once

#include <cstdint>  // std::int64_t, std::int32_t, std::uint64_t, std::uint8_t
#include <span>     // std::span
#include <vector>   // std::vector

#include "pare/ranking.h"
#include "pare/stats.h"

namespace pare::internal {

/// The bit of `c` in FeatureScores::defined.
constexpr std::uint8_t defined_bit(Criterion c) { return static_cast<std::uint8_t>(1u << static_cast<unsigned>(c)); }

/// Buffers of the kNN estimator, reused from feature to feature (one set per thread).
struct KnnScratch {
  std::vector<std::int64_t> count, offset, fill;
  std::vector<double> members, all;
};

/// Per-thread scratch space for one feature at a time.
struct ClassScratch {
  std::vector<std::uint64_t> keys, buffer;
  std::vector<double> table;
  std::vector<double> values;
  std::vector<int> labels;
  std::vector<double> class_sum, class_mean;
  std::vector<std::int64_t> class_count;
  std::vector<float> gathered;  ///< score_class_rows: the column's values at the rows
  std::vector<std::int64_t> lane_count;  ///< tally_classes: per-lane class counts
  std::vector<double> lane_sum;          ///< tally_classes: per-lane class sums
  /// score_class_column: the observed values' order keys and class codes in row order, the radix
  /// select's buffers, the bins' thresholds and their sorted positions, the per-lane bin x class
  /// counts.
  std::vector<std::uint32_t> value_keys, sorted_values, sort_buffer, thresholds;
  std::vector<int> value_codes;
  std::vector<std::int64_t> positions;
  std::vector<std::int32_t> lane_table;
  KnnScratch knn;
};

struct ClassResult {
  double mi = 0, chi2 = 0, chi2_p = 1, f = 0, f_p = 1, counts = 0, counts_p = 1, variance = 0, missing_rate = 0;
  int chi2_df = 0;
  std::uint8_t flags = 0;
  std::uint8_t defined = 0;  ///< bits defined_bit(Criterion) (FeatureScores::defined)
  bool negative = false;
};

/// What to compute. Everything by default (score_features); a resample needs only the score its
/// criterion ranks by and, with --fdr, that criterion's p-value (the tail functions are the costly
/// part once the sort is shared). Scores not wanted stay at their defaults (0, p 1); the defined
/// bits are set as with everything computed.
struct ClassWanted {
  bool table = true;     ///< the bin x class table: the chi-square statistic, the binned MI, their defined bits
  bool chi2 = true;      ///< the chi-square statistic (else only whether the table has df > 0)
  bool mi = true;        ///< MI (binned or kNN, options.mi)
  bool chi2_p = true;    ///< the chi-square test's p (the statistic comes with the table)
  bool f = true, f_p = true;
  bool counts_p = true;  ///< the counts chi-square's p (its statistic when options.counts_chi2)
};

/// Only what ranking by `c` needs, and its test's p-value when `test`.
ClassWanted wanted_for(Criterion c, bool test);

/// The scores of column[0..n_rows-1] against `codes` (k classes). `known`, if not null, holds the
/// column's column_stats.
ClassResult score_class_column(const float* column, std::int64_t n_rows, std::span<const int> codes, int k,
                               const ScoreOptions& options, ClassScratch& s, const ColumnStats* known,
                               const ClassWanted& wanted = {});

/// The keys of the observed values of column[0..n_rows-1] (order_key << 32 | row), sorted by value
/// with ties in row order, into `keys`.
void sorted_value_keys(const float* column, std::int64_t n_rows, std::vector<std::uint64_t>& keys,
                       std::vector<std::uint64_t>& buffer);

/// score_class_column of the values column[rows[0]], column[rows[1]], … (rows ascending) against
/// `codes` (one per entry of `rows`), bit for bit, without a sort: `sorted` are the column's
/// sorted_value_keys over all its rows and `position` maps a row to its place in `rows` (-1 when
/// not there).
ClassResult score_class_rows(const float* column, std::span<const std::int64_t> rows,
                             std::span<const std::int32_t> position, std::span<const std::uint64_t> sorted,
                             std::span<const int> codes, int k, const ScoreOptions& options, ClassScratch& s,
                             const ClassWanted& wanted);

}  // namespace pare::internal
