// Stability selection (Meinshausen & Bühlmann 2010, "Stability selection", JRSS B 72(4): 417-473;
// complementary pairs: Shah & Samworth 2013, JRSS B 75(1): 55-80): the relevance, redundancy and
// top steps run again on many random subsets of the samples, and a feature is selected by how often
// it is kept. The subsets are lists of row indices into the one matrix; nothing is copied whole.
#pragma once

#include <cstdint>  // std::int64_t, std::uint64_t, std::uint8_t
#include <span>     // std::span
#include <string>   // std::string
#include <vector>   // std::vector

#include "pare/matrix.h"
#include "pare/ranking.h"
#include "pare/sampling.h"

namespace pare {

struct ReduceOptions;
struct Reduction;

/// How the subsets are drawn.
enum class ResampleScheme {
  kHalves,  ///< each resample an independent stratified draw of `fraction` of the samples
  kPairs,   ///< complementary pairs: each draw of half the samples is followed by the other half
};

/// Parses halves|pairs; throws Error(kUsage) otherwise.
ResampleScheme parse_resample_scheme(const std::string& name);
const char* resample_scheme_name(ResampleScheme scheme);

struct StabilityOptions {
  std::int64_t resamples = 0;    ///< B, the subsets drawn; 0 = no stability selection
  double fraction = 0.5;         ///< of the samples in each subset, in (0, 1); pairs: 0.5
  double min_stability = 0.6;    ///< PI: a feature kept in at least this fraction is selected, in (0.5, 1]
  ResampleScheme scheme = ResampleScheme::kHalves;
};

/// Checks the values and that `keep` (q, the features kept per subset) is set. Throws
/// Error(kUsage) naming the option.
void check_stability_options(const StabilityOptions& options, std::int64_t keep);

/// The rows of each subset, ascending, within the strata of sample_strata. Halves: subset b is
/// stratified_rows(strata, fraction) from its own stream of `seed`. Pairs (B even, fraction 0.5):
/// pair b/2 shuffles each stratum and deals its samples alternately to the two halves, an odd
/// stratum's last sample to the half that is smaller so far (the first on a tie), so the halves
/// are disjoint, cover every sample and differ in size by at most one.
std::vector<std::vector<std::int64_t>> draw_resamples(const FeatureTable& table, const StabilityOptions& options,
                                                     std::uint64_t seed);

/// The ranking criterion's score and q-value (Benjamini–Hochberg within the subset) of each of
/// `features` on the rows of each subset, exactly as score_features / score_against_target on
/// those rows alone would give them, and whether the criterion is defined there
/// (criterion_defined). Binned scores sort each feature once for all subsets. q is computed only
/// with `test` (else 1).
struct SubsetScores {
  std::vector<std::vector<double>> score, q;          ///< [subset][feature]
  std::vector<std::vector<std::uint8_t>> defined;     ///< [subset][feature]: 1 when defined
};
SubsetScores score_subsets(const ConstMatrixRef& m, std::span<const std::int64_t> features, const FeatureTable& table,
                           std::span<const std::vector<std::int64_t>> subsets, Criterion criterion, bool test,
                           const ScoreOptions& options);

/// What stability selection found (plan.json "stability", the summary).
struct StabilityRecord {
  StabilityOptions options;
  std::uint64_t seed = 1;             ///< of the draws (ReduceOptions::seed)
  std::int64_t q = 0;                 ///< features kept per subset (--keep)
  std::int64_t p = 0;                 ///< features entering relevance
  double bound = 0;                   ///< E[V] <= q² / ((2·PI − 1)·p)
  std::int64_t subset_samples_min = 0, subset_samples_max = 0;
  std::vector<std::int32_t> kept_in;  ///< per input feature: subsets that kept it
  std::int64_t selected = 0;          ///< features with stability >= PI
};

/// The bound on the expected number of falsely selected features, q² / ((2·PI − 1)·p).
double stability_bound(std::int64_t q, std::int64_t p, double min_stability);

/// Steps 5b-7 with options.stability.resamples > 0, in place of prune_redundant and take_top: each
/// subset scores the features still in the running (after rank_relevance on all samples), ranks them,
/// applies --fdr with its own q-values, prunes them for redundancy on its rows (gaps filled with
/// the learned fill values) and keeps the first options.keep; the features kept in at least
/// min_stability of the subsets are ordered by that fraction, then by their rank on all samples,
/// and pruned for redundancy on all samples; the others are dropped with step `stability`.
/// Deterministic for any thread count.
void select_stable(FeatureTable& table, const ReduceOptions& options, Reduction& r);

}  // namespace pare
