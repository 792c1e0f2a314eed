// The scores of one feature against a continuous target, and what they need of the target: the
// per-feature work of score_against_target, open to the resamples of stability selection, which
// prepare the target once per resample and score each feature on its rows. Private to the library.
#pragma once

#include <cstdint>  // std::int64_t, std::uint32_t, std::uint8_t
#include <memory>   // std::unique_ptr
#include <span>     // std::span
#include <vector>   // std::vector

#include "pare/ranking.h"
#include "pare/stats.h"

namespace pare::internal {

/// What every feature needs of the target on the rows it is scored on (all rows, or a feature's
/// observed rows renumbered 0..n-1).
struct TargetPrep {
  std::int64_t n = 0;
  bool constant = true;
  std::vector<double> values;         ///< t
  std::vector<double> centred;        ///< t − mean
  double ss = 0;                      ///< Σ centred²
  std::vector<double> rank_centred;   ///< average rank − (n+1)/2
  double rank_ss = 0;                 ///< Σ rank_centred²
  double inv_sd = 0;                  ///< 1 / sd (n denominator): the MI's scale of y
  std::vector<std::uint32_t> order;   ///< indices by ascending t, ties by index
  std::vector<double> sorted;         ///< t[order[i]]
  std::vector<std::uint32_t> run_start;  ///< per index, where its run of equal t starts in `order`
};

/// Fills `p` from `t` and p.order (already set: the stable ascending order of t).
void prepare_target(std::span<const double> t, TargetPrep& p);

/// The indices of `v` by ascending value, ties in index order.
std::vector<std::uint32_t> stable_order(std::span<const double> v);

/// The scores to compute: all (score_against_target), or what one criterion ranks by and, with
/// --fdr, its p-value. Scores not wanted stay 0 with p 1 and their defined bits unset.
struct TargetWanted {
  bool pearson = true, spearman = true, mi = true;
  bool p = true;  ///< the p-values of the correlations wanted
};

/// Only what ranking by `c` needs (Spearman's test also for mi), with p-values when `test`.
TargetWanted target_wanted_for(Criterion c, bool test);

struct TargetResult {
  double pearson_r = 0, pearson_p = 1, spearman_rho = 0, spearman_p = 1, mi = 0, variance = 0, missing_rate = 0;
  std::uint8_t flags = 0;
  std::uint8_t defined = 0;
};

/// Scores one feature at a time with buffers kept from feature to feature (one per thread).
class TargetScorer {
 public:
  TargetScorer();
  ~TargetScorer();
  TargetScorer(TargetScorer&&) noexcept;
  TargetScorer& operator=(TargetScorer&&) noexcept;

  /// The scores of column[0..n_rows-1] against `target` (one finite value per row) prepared as
  /// `prep` (on all those rows), each on the rows where the column is observed; k the kNN MI's
  /// neighbours. `known`, if not null, holds the column's column_stats.
  TargetResult score(const float* column, std::int64_t n_rows, const TargetPrep& prep, std::span<const double> target,
                     int k, const ColumnStats* known, const TargetWanted& wanted = {});

  struct Buffers;  ///< defined in src/target_scores.cpp

 private:
  std::unique_ptr<Buffers> buffers_;
};

}  // namespace pare::internal
