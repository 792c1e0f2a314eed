// Scoring every feature against a class label or a continuous target, multiple-testing control and
// ranking.
#pragma once

#include <cstdint>  // std::int64_t, std::uint8_t
#include <span>     // std::span
#include <string>   // std::string
#include <vector>   // std::vector

#include "pare/matrix.h"
#include "pare/stats.h"

namespace pare {

/// What to rank features by. mi and variance serve both kinds of target; chi2, chi2-counts and f
/// need classes, pearson and spearman a continuous target.
enum class Criterion { kMi, kChi2, kChi2Counts, kF, kVariance, kPearson, kSpearman };

/// Parses mi|chi2|chi2-counts|f|variance|pearson|spearman; throws Error(kUsage) otherwise.
Criterion parse_criterion(const std::string& name);
const char* criterion_name(Criterion c);

/// How mutual information is estimated.
enum class MiEstimator {
  kBinned,  ///< plug-in estimate on equal-frequency bins (SPEC §4), nats
  kKnn,     ///< nearest-neighbour estimator for a feature against a discrete label (Ross 2014,
            ///< PLoS ONE 9(2): e87357) with the tie rule of Gao, Kannan, Oh & Viswanath (NeurIPS
            ///< 2017) for discrete-continuous mixtures, nats; no added noise
};

struct ScoreOptions {
  int bins = 10;            ///< equal-frequency bins for MI and the chi-square test, >= 2
  MiEstimator mi = MiEstimator::kBinned;
  int neighbors = 3;        ///< k of the kNN estimator, >= 1
  bool counts_chi2 = false; ///< also compute the counts chi-square (non-negative features only)
  int threads = 0;
};

/// Flags of a feature's scores (bits).
enum ScoreFlag : std::uint8_t {
  kScoreFewValues = 1,  ///< F is undefined: fewer than two classes observed, or no more observed
                        ///< values than classes: F 0, p 1 (MI and chi-square are still computed)
  kScoreConstant = 2,   ///< zero variance over the observed values: scores 0, p-values 1
  kScoreSeparates = 4,  ///< zero variance inside every class but not overall: F is infinite
};

/// Scores of the scored features (parallel arrays, one entry per scored feature). Against classes
/// the chi2*, f* (and chi2_counts*) arrays are filled; against a continuous target the pearson*
/// and spearman* arrays are; mi, variance, missing_rate, flags and defined always are.
struct FeatureScores {
  bool continuous = false;              ///< scored against a continuous target, not classes
  std::vector<std::int64_t> feature;    ///< column index in the matrix
  std::vector<double> mi;               ///< nats
  std::vector<double> pearson_r, pearson_p, pearson_q;       ///< continuous target: r, two-sided p, BH q
  std::vector<double> spearman_rho, spearman_p, spearman_q;  ///< continuous target: rho, p, q
  std::vector<double> chi2, chi2_p, chi2_q, chi2_bonferroni;
  std::vector<int> chi2_df;
  std::vector<double> f, f_p, f_q, f_bonferroni;
  std::vector<double> chi2_counts, chi2_counts_p, chi2_counts_q, chi2_counts_bonferroni;  ///< when counts_chi2
  std::vector<double> variance, missing_rate;
  std::vector<std::uint8_t> flags;
  /// Per feature, bit (1 << Criterion) set when that criterion's score could be computed; read it
  /// through criterion_defined.
  std::vector<std::uint8_t> defined;
  std::size_t size() const { return feature.size(); }
};

/// Equal-frequency bin of every value (SPEC §4): value x of n gets floor(bins * L(x) / n), L(x) the
/// number of values strictly less than x, so ties share a bin. `values` must hold no NaN.
std::vector<int> equal_frequency_bins(std::span<const double> values, int bins);

/// Plug-in mutual information (nats) of a contingency table given row-major, rows x cols.
double mutual_information(std::span<const double> table, int rows, int cols);

/// Pearson chi-square statistic of a contingency table after dropping empty rows and columns;
/// `df` receives (rows'-1)(cols'-1).
double pearson_chi2(std::span<const double> table, int rows, int cols, int& df);

/// Upper tail of the chi-square distribution with `df` degrees of freedom (Boost.Math).
double chi2_upper_tail(double statistic, double df);
/// Upper tail of the F distribution (Boost.Math).
double f_upper_tail(double statistic, double df1, double df2);

/// The nearest-neighbour MI estimate (nats) of `x` against class codes `y` (0..classes-1), k >= 1:
/// on data without ties the Ross (2014) estimator exactly as CHECKS.md §5 states it; tied values
/// and tied distances are counted as Gao et al. (2017) count them
/// (notebooks-free-docs/numerics.md). Points alone in their class are left out.
double knn_mutual_information(std::span<const double> x, std::span<const int> y, int classes, int k);

/// Average ranks (1-based; tied values share the mean of their positions) of `x`, which must hold
/// no NaN: the ranks Spearman's rho correlates.
std::vector<double> average_ranks(std::span<const double> x);

/// Two-sided p-value of a correlation coefficient `r` over `n` pairs: t = r·sqrt((n−2)/(1−r²)) on
/// Student's t with n − 2 degrees of freedom (Boost.Math); 0 for |r| = 1, 1 for n < 3 or NaN r.
double correlation_p(double r, std::int64_t n);

/// The nearest-neighbour MI estimate (nats) of two continuous variables (Kraskov, Stögbauer &
/// Grassberger 2004, estimator 1; SPEC §9, CHECKS §11), k >= 1, x and y of equal length without
/// NaN or infinity: distances |Δx|/sd_x and |Δy|/sd_y (sd with n denominator), max-norm, ε_i the
/// distance to the k-th nearest other point, no added noise, clipped at 0. All counts are taken in
/// one neighbourhood, point i included: for ε_i > 0 k_i, n_x + 1 and n_y + 1 are the points strictly
/// closer than ε_i in both variables, in x and in y; for ε_i = 0 (k or more others equal to it)
/// those equal to it in both, in x and in y (Gao et al. 2017); I = ψ(N) + ⟨ψ(k_i)⟩ − ⟨ψ(n_x+1)⟩ −
/// ⟨ψ(n_y+1)⟩. Without ties k_i = k and this is estimator 1 exactly; with values on a grid it keeps
/// unrelated variables near 0 (notebooks-free-docs/numerics.md). 0 when either variable is
/// constant or there are not more than k points.
double knn_mutual_information_continuous(std::span<const double> x, std::span<const double> y, int k);

/// Benjamini–Hochberg step-up adjusted p-values (q-values), in the order of `p`.
std::vector<double> bh_adjust(std::span<const double> p);
/// Bonferroni-adjusted p-values: min(1, m p).
std::vector<double> bonferroni_adjust(std::span<const double> p);

/// Scores the columns `features` of `m` against `classes` (one code per row of `m`), in parallel
/// over features. Results do not depend on the thread count. Needs at least 2 classes. `stats`, if
/// given, holds column_stats of each of the columns (one per entry of `features`), which the
/// caller often has already; otherwise they are computed. With `rows` (ascending), only those rows
/// are scored, as if they were the whole matrix (`stats` is then ignored): the balanced scores.
FeatureScores score_features(const ConstMatrixRef& m, std::span<const std::int64_t> features,
                             const ClassCodes& classes, const ScoreOptions& options,
                             std::span<const ColumnStats> stats = {}, std::span<const std::int64_t> rows = {});

/// Scores the columns `features` of `m` against a continuous `target` (one finite value per row of
/// `m`), in parallel over features, each on the rows where it is observed: Pearson r, Spearman rho
/// (Pearson on average ranks), both with two-sided p (correlation_p) and BH q over the scored
/// features, the kNN MI (knn_mutual_information_continuous with options.neighbors), variance and
/// missing rate. Results do not depend on the thread count. pearson and spearman are defined with
/// 3 or more observed pairs and neither the feature nor the target constant on them (pearson also
/// needs finite values); mi with more than options.neighbors pairs, finite, neither constant.
/// Undefined scores are 0 with p = 1. `stats` as for score_features.
FeatureScores score_against_target(const ConstMatrixRef& m, std::span<const std::int64_t> features,
                                   std::span<const double> target, const ScoreOptions& options,
                                   std::span<const ColumnStats> stats = {});

/// The positions 0..size-1 of `scores` in ranking order for `criterion`: score descending, ties in
/// input order.
std::vector<std::size_t> rank_order(const FeatureScores& scores, Criterion criterion);

/// The score and q-value a criterion ranks by and filters on (--fdr): mi uses the chi-square test
/// on the same bins against classes, Spearman's test against a continuous target; pearson and
/// spearman rank by |r| and |rho|.
double criterion_score(const FeatureScores& s, Criterion c, std::size_t i);
double criterion_q(const FeatureScores& s, Criterion c, std::size_t i);

/// Whether `c` can rank against classes (`continuous` false) or a continuous target (true).
bool criterion_fits(Criterion c, bool continuous);

/// Throws Error(kUsage) when `c` cannot rank against that kind of target, naming the criteria that can.
void require_criterion_fits(Criterion c, bool continuous);

/// Whether feature i (a position in `s`) could be scored for `c`: false for a constant feature
/// (every criterion but variance), for f when F is undefined (kScoreFewValues) or the feature holds
/// an infinite value, for mi and chi2 when its bin x class table has fewer than two non-empty rows
/// or columns (the kNN MI: fewer than two classes with two observed values, or an infinite value),
/// for chi2-counts when it was not computed; always true for variance.
bool criterion_defined(const FeatureScores& s, Criterion c, std::size_t i);

/// ranking.tsv for the positions `order` (rank = position in `order` + 1). `info_names` /
/// `info` (FeatureTable::feature_info_names / feature_info, [column][feature]) are written as
/// columns right after `feature`; `stability` (one per entry of `order`, stability selection), if
/// given, as the last column.
std::string ranking_tsv(const FeatureScores& scores, std::span<const std::size_t> order,
                        const std::vector<std::string>& feature_names, bool with_counts,
                        const std::vector<std::string>& info_names = {},
                        const std::vector<std::vector<std::string>>& info = {},
                        std::span<const double> stability = {});

/// The flags as text, comma-separated (empty when none).
std::string score_flag_names(std::uint8_t flags);

}  // namespace pare
