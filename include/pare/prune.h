// Correlation pruning: walk features in rank order and drop one whose |Pearson r| with a feature
// already kept exceeds a threshold. Correlations are computed in blocks with matrix products on
// standardised columns; the p x p correlation matrix is never formed.
#pragma once

#include <cstdint>  // std::int64_t
#include <span>     // std::span
#include <vector>   // std::vector

#include "pare/matrix.h"

namespace pare {

struct PruneOptions {
  double max_corr = 0.9;       ///< drop when |r| with a kept feature is above this, in [0, 1]
  std::int64_t max_kept = 0;   ///< stop once this many are kept (0 = no limit)
  std::int64_t block = 512;    ///< candidates standardised and compared per matrix product
  int threads = 0;
  std::int64_t memory_budget = 0;  ///< bytes the kept set may use (0 = no limit); past it, Error(kUsage)
};

/// The decision for each candidate, in candidate order.
struct PruneResult {
  std::vector<std::int64_t> partner;  ///< -1 kept or not examined; else the candidate position
                                      ///< (in `candidates`) of the kept feature it duplicates
  std::vector<double> r;              ///< Pearson r with `partner` (in double), 0 when kept
  std::vector<char> kept;             ///< 1 kept
  std::int64_t examined = 0;          ///< candidates examined; the rest were beyond max_kept
};

/// Prunes the columns `candidates` of `m` (in rank order, no NaN) as described above. The decision
/// is that of the sequential walk in double precision: products run in float32 and every pair
/// within the float rounding margin of the threshold is recomputed in double. A column with zero
/// variance correlates with nothing. Results do not depend on `threads`.
PruneResult prune_correlated(const ConstMatrixRef& m, std::span<const std::int64_t> candidates,
                             const PruneOptions& options);

}  // namespace pare
