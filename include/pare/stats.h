// Per-feature summary statistics, accumulated in double with a numerically stable two-pass method.
#pragma once

#include <cstdint>  // std::int64_t
#include <span>     // std::span
#include <vector>   // std::vector

#include "pare/matrix.h"

namespace pare {

/// Statistics of one feature over its observed (non-NaN) values.
struct ColumnStats {
  std::int64_t n = 0;        ///< observed values
  std::int64_t missing = 0;  ///< NaN values
  double mean = 0;           ///< NaN when n == 0
  double variance = 0;       ///< sample variance (ddof 1); NaN when n < 2
  double min = 0;            ///< NaN when n == 0
  double max = 0;            ///< NaN when n == 0

  double missing_rate() const {
    const auto total = n + missing;
    return total > 0 ? static_cast<double>(missing) / static_cast<double>(total) : 0.0;
  }
};

/// Statistics of one column. Uses the corrected two-pass algorithm (Chan, Golub & LeVeque 1983):
/// mean first, then the sum of squared deviations minus the squared sum of deviations / n, which
/// cancels the rounding error left in the mean.
ColumnStats column_stats(std::span<const float> values);
ColumnStats column_stats(std::span<const double> values);

/// Statistics of every column of `m`, in parallel over columns (results do not depend on
/// `threads`; 0 = OpenMP's default).
std::vector<ColumnStats> compute_column_stats(const ConstMatrixRef& m, int threads = 0);

/// Missing (NaN) cells of every row of `m`.
std::vector<std::int64_t> missing_per_row(const ConstMatrixRef& m, int threads = 0);

}  // namespace pare
