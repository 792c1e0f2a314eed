// The sample screen: a small PCA of the input's most variable features and, on its first
// components, a robust distance of every sample (median/MAD standardisation), with a threshold
// that flags the extreme ones. Flagging removes nothing; the caller decides.
#pragma once

#include <cstdint>  // std::int64_t, std::uint64_t
#include <span>     // std::span
#include <string>   // std::string
#include <vector>   // std::vector

#include <Eigen/Core>

#include "pare/matrix.h"

namespace pare {

/// Robust distances of samples from their scores on K components.
struct RobustDistances {
  std::vector<double> center;    ///< K: median score of each component (over all samples)
  std::vector<double> spread;    ///< K: robust sd of each component (see robust_distances)
  std::vector<double> distance;  ///< n: sqrt(sum over k of z_ik^2), z = (score - center) / spread
  std::vector<char> flagged;     ///< n: 1 when distance > threshold
  double threshold = 0;          ///< on the distance: sqrt(chi-square(K) upper alpha/n quantile)
  double alpha = 0.05;           ///< chance that clean data of any size has a flagged sample
};

/// Smallest class whose own median a sample is measured from; smaller classes use the overall one.
inline constexpr std::int64_t kMinClassForCenter = 5;

/// Robust distances of the rows of `scores` (n samples x K components, finite, n >= 1, K >= 1).
/// Each score is measured from the median of its component, or, when `classes` (one class code
/// 0..k-1 per sample) is given, from the median of its class (classes of at least
/// kMinClassForCenter samples), and divided by a robust sd of those differences over all samples:
/// the larger of 1.4826 x their median absolute value (the MAD) and their 80th percentile /
/// 1.2816. A sample is flagged when its squared distance exceeds the upper alpha/n quantile of
/// the chi-square distribution with K degrees of freedom, alpha in (0, 1).
RobustDistances robust_distances(const Eigen::MatrixXd& scores, double alpha = 0.05,
                                 std::span<const int> classes = {});

/// x with P(chi-square with `df` degrees of freedom > x) = tail, tail in (0, 1) (Boost.Math).
double chi2_upper_quantile(double tail, double df);

struct ScreenOptions {
  std::int64_t components = 3;       ///< K of the screening PCA (fewer when the data has less)
  std::int64_t max_features = 5000;  ///< analyse at most this many of the most variable features
  double max_missing = 0.2;          ///< features missing more than this fraction are left out
  std::int64_t min_samples = 10;     ///< below this the robust scale means little: no screen
  bool log2 = false;                 ///< analyse log2(x + 1), as reduce --log2 does
  double alpha = 0.05;
  std::uint64_t seed = 1;
  int threads = 0;
};

/// The result of the screen. Every vector indexed by sample has one entry per row of the input.
struct SampleScreen {
  bool done = false;                   ///< false: too few samples or usable features (see reason)
  std::string reason;                  ///< why the screen was not done (empty when done)
  std::vector<std::int64_t> missing;   ///< missing cells per sample, over every feature
  std::int64_t n_features = 0;         ///< features of the input (the denominator of missing)
  std::int64_t n_eligible = 0;         ///< features usable before the max_features cap
  std::vector<std::int64_t> features;  ///< the columns analysed, ascending
  Eigen::MatrixXd scores;              ///< n x K scores of the standardised, mean-filled columns
  Eigen::VectorXd ratio;               ///< K: share of the analysed columns' total variance
  RobustDistances robust;              ///< empty when !done
  ScreenOptions options;
  bool by_class = false;  ///< distances were measured from class medians

  double missing_rate(std::size_t i) const;
  /// Indices of the flagged samples, ascending.
  std::vector<std::int64_t> flagged() const;
};

/// Screens the samples (rows) of `m` (NaN = missing): the features with at most
/// options.max_missing missing, at least two observed values and a positive variance are ranked
/// by variance (of log2(x + 1) with options.log2; ties by position); the first max_features are
/// mean-filled, standardised, and their first K principal components computed; robust_distances
/// flags the samples (from their class's median when `classes` is given: classes that separate
/// on the components are not outliers). Results do not depend on options.threads.
SampleScreen screen_samples(const ConstMatrixRef& m, const ScreenOptions& options,
                            std::span<const int> classes = {});

/// samples.tsv: one line per sample: sample, the label (when there are labels; NA for a sample
/// without one), the `info` columns (--sample-info: [column][sample], headed by `info_names`),
/// missing, missing_rate, screen_pc1..K, distance, outlier (yes/no), dropped (yes/no); NA where
/// the screen was not done. `dropped` has one entry per sample or is empty (none dropped).
std::string samples_tsv(const SampleScreen& screen, const std::vector<std::string>& sample_ids,
                        const std::vector<std::string>& labels, const std::string& label_name,
                        const std::vector<char>& dropped, const std::vector<std::string>& info_names = {},
                        const std::vector<std::vector<std::string>>& info = {});

/// The rule, in words for a person, e.g. "distance > 4.42 = sqrt of the chi-square(3) upper
/// 0.05/240 quantile".
std::string screen_rule(const SampleScreen& screen);

}  // namespace pare
