// Unit tests of include/pare/ranking.h against published tables and worked examples
// (/work/shared/CHECKS.md sections 1-6 and 8) and closed forms. The reference value of every check
// is named beside it; values recomputed with Debian's scipy 1.10.1 (/usr/bin/python3) say so.
#include "pare/ranking.h"

#include <algorithm>  // std::reverse, std::shuffle
#include <numeric>    // std::iota
#include <cmath>      // std::exp, std::erfc, std::log, std::sqrt, std::isnan, std::isinf
#include <cstdint>    // std::int64_t, std::uint8_t
#include <cstdlib>    // std::getenv
#include <cstring>    // std::memcmp
#include <limits>     // std::numeric_limits
#include <random>     // std::mt19937_64, distributions
#include <sstream>    // std::istringstream
#include <string>     // std::string, std::stod
#include <utility>    // std::pair
#include <vector>     // std::vector

#include <catch2/catch.hpp>

#include "pare/error.h"
#include "pare/io.h"
#include "pare/matrix.h"

namespace {

using pare::ClassCodes;
using pare::FeatureScores;
using pare::Matrix;

const double kLn2 = std::log(2.0);

// Relative difference, exact zero when both are equal (including both zero).
double rel_diff(double actual, double expected) {
  if (actual == expected) return 0.0;
  return std::abs(actual - expected) / std::abs(expected);
}

ClassCodes classes_of(const std::vector<std::string>& labels) {
  return pare::encode_classes(labels);
}

std::vector<std::int64_t> all_columns(const Matrix& m) {
  std::vector<std::int64_t> out(static_cast<std::size_t>(m.cols()));
  for (std::size_t j = 0; j < out.size(); ++j) out[j] = static_cast<std::int64_t>(j);
  return out;
}

// Every score vector of `s` that is filled, by name, for NaN and bit-identity checks.
std::vector<std::pair<std::string, const std::vector<double>*>> score_vectors(
    const FeatureScores& s) {
  std::vector<std::pair<std::string, const std::vector<double>*>> v = {
      {"mi", &s.mi},
      {"chi2", &s.chi2},
      {"chi2_p", &s.chi2_p},
      {"chi2_q", &s.chi2_q},
      {"chi2_bonferroni", &s.chi2_bonferroni},
      {"f", &s.f},
      {"f_p", &s.f_p},
      {"f_q", &s.f_q},
      {"f_bonferroni", &s.f_bonferroni},
      {"variance", &s.variance},
      {"missing_rate", &s.missing_rate}};
  if (!s.chi2_counts.empty()) {
    v.push_back({"counts", &s.chi2_counts});
    v.push_back({"counts_p", &s.chi2_counts_p});
    v.push_back({"counts_q", &s.chi2_counts_q});
    v.push_back({"counts_bonferroni", &s.chi2_counts_bonferroni});
  }
  return v;
}

template <typename T>
bool same_bits(const std::vector<T>& a, const std::vector<T>& b) {
  return a.size() == b.size() &&
         (a.empty() || std::memcmp(a.data(), b.data(), a.size() * sizeof(T)) == 0);
}

}  // namespace

// ---- CHECKS.md §1: chi-square upper tail ---------------------------------------------------

TEST_CASE("chi2_upper_tail brackets the NIST critical values", "[ranking][chi2]") {
  // Source: NIST/SEMATECH e-Handbook of Statistical Methods, 1.3.6.7.4 (upper critical values of
  // the chi-square distribution), via CHECKS.md §1. The table prints 3 decimals, so the exact
  // critical value lies within +-5e-4 of the table's x (CHECKS §1 tolerance 5e-4 vs table): the
  // tail must be >= alpha at x - 5e-4 and <= alpha at x + 5e-4.
  struct Row {
    int df;
    double x05, x01;          // NIST table
    double exact05, exact01;  // CHECKS §1 "V": scipy chi2.isf, 6 decimals
  };
  const Row rows[] = {{1, 3.841, 6.635, 3.841459, 6.634897},
                      {2, 5.991, 9.210, 5.991465, 9.210340},
                      {3, 7.815, 11.345, 7.814728, 11.344867},
                      {4, 9.488, 13.277, 9.487729, 13.276704},
                      {5, 11.070, 15.086, 11.070498, 15.086272}};
  for (const Row& r : rows) {
    INFO("df = " << r.df);
    const double df = r.df;
    CHECK(pare::chi2_upper_tail(r.x05 - 5e-4, df) >= 0.05);
    CHECK(pare::chi2_upper_tail(r.x05 + 5e-4, df) <= 0.05);
    CHECK(pare::chi2_upper_tail(r.x01 - 5e-4, df) >= 0.01);
    CHECK(pare::chi2_upper_tail(r.x01 + 5e-4, df) <= 0.01);
    // At the table's x itself: |p - alpha| <= 5e-4 (CHECKS §1 table tolerance).
    CHECK(std::abs(pare::chi2_upper_tail(r.x05, df) - 0.05) <= 5e-4);
    CHECK(std::abs(pare::chi2_upper_tail(r.x01, df) - 0.01) <= 5e-4);
    // At scipy's 6-decimal isf (CHECKS §1, recomputed with scipy and R): rounding x by 5e-7 moves
    // p by < 5e-7 * density (< 0.25), so 1e-6 (CHECKS §1 tolerance vs scipy) holds.
    CHECK(std::abs(pare::chi2_upper_tail(r.exact05, df) - 0.05) <= 1e-6);
    CHECK(std::abs(pare::chi2_upper_tail(r.exact01, df) - 0.01) <= 1e-6);
  }
}

TEST_CASE("chi2_upper_tail equals the closed forms for df = 1 and df = 2", "[ranking][chi2]") {
  // Closed forms (CHECKS.md §1): df = 2: sf(x) = exp(-x/2); df = 1: sf(x) = erfc(sqrt(x/2)).
  // Boost.Math's regularised incomplete gamma is accurate to a few ulp; 1e-13 relative leaves
  // room for the library's own exp/erfc rounding (observed differences are ~1e-16).
  for (double x : {1e-8, 1e-3, 0.1, 0.5, 1.0, 2.0, 3.841459, 7.5, 15.0, 40.0, 100.0, 300.0}) {
    INFO("x = " << x);
    const double df2 = pare::chi2_upper_tail(x, 2.0);
    const double df1 = pare::chi2_upper_tail(x, 1.0);
    INFO("df=2: " << df2 << " vs " << std::exp(-x / 2) << "; df=1: " << df1 << " vs "
                  << std::erfc(std::sqrt(x / 2)));
    CHECK(rel_diff(df2, std::exp(-x / 2)) <= 1e-13);
    CHECK(rel_diff(df1, std::erfc(std::sqrt(x / 2))) <= 1e-13);
  }
  // Edges defined by the header: no evidence (x <= 0) gives p = 1; an infinite statistic p = 0.
  CHECK(pare::chi2_upper_tail(0.0, 3.0) == 1.0);
  CHECK(pare::chi2_upper_tail(std::numeric_limits<double>::infinity(), 3.0) == 0.0);
  // Far tail underflows to 0 (or a subnormal), never NaN and never an exception.
  const double far = pare::chi2_upper_tail(1e6, 4.0);
  CHECK(far >= 0.0);
  CHECK(far < 1e-300);
}

// ---- F upper tail -------------------------------------------------------------------------

TEST_CASE("f_upper_tail agrees with scipy.stats.f.sf and the df1 = 2 closed form", "[ranking][f]") {
  // Reference values computed for this test with Debian's scipy 1.10.1 (/usr/bin/python3):
  //   scipy.stats.f.sf(3.5, 2, 20)   = 0.04973502207609711
  //   scipy.stats.f.sf(2.0, 5, 12)   = 0.15092607909293687
  //   scipy.stats.f.sf(10.0, 1, 30)  = 0.0035685233088176838
  //   scipy.stats.f.sf(0.5, 3, 7)    = 0.6940363875688136
  //   scipy.stats.f.sf(119.26451159546262, 2, 147) = 1.6696631994323084e-31 (iris sepal length)
  // Both libraries evaluate the regularised incomplete beta to near full double precision; 1e-10
  // relative allows for different evaluation paths in the far tail.
  struct Case {
    double x, df1, df2, expected;
  };
  const Case cases[] = {{3.5, 2, 20, 0.04973502207609711},
                        {2.0, 5, 12, 0.15092607909293687},
                        {10.0, 1, 30, 0.0035685233088176838},
                        {0.5, 3, 7, 0.6940363875688136},
                        {119.26451159546262, 2, 147, 1.6696631994323084e-31}};
  for (const Case& c : cases) {
    const double p = pare::f_upper_tail(c.x, c.df1, c.df2);
    INFO("F(" << c.df1 << ", " << c.df2 << ") at " << c.x << ": " << p << " vs " << c.expected);
    CHECK(rel_diff(p, c.expected) <= 1e-10);
  }
  // Closed form: for df1 = 2, sf(x) = (1 + 2x/df2)^(-df2/2) (the F(2, n) upper tail integrates in
  // closed form; standard textbook identity, stated from memory and verified against scipy).
  for (double x : {0.1, 1.0, 4.0, 25.0}) {
    for (double d2 : {3.0, 10.0, 57.0}) {
      INFO("x = " << x << ", df2 = " << d2);
      CHECK(rel_diff(pare::f_upper_tail(x, 2.0, d2), std::pow(1 + 2 * x / d2, -d2 / 2)) <= 1e-12);
    }
  }
  CHECK(pare::f_upper_tail(0.0, 2.0, 10.0) == 1.0);
  CHECK(pare::f_upper_tail(std::numeric_limits<double>::infinity(), 2.0, 10.0) == 0.0);
  const double far = pare::f_upper_tail(1e300, 1.0, 10.0);
  CHECK(far >= 0.0);
  CHECK(far < 1e-300);
}

// ---- CHECKS.md §2: Pearson chi-square of a contingency table --------------------------------

TEST_CASE("pearson_chi2 on the Agresti 2x3 table and the 2x2 aspirin table", "[ranking][chi2]") {
  int df = -1;
  // Agresti (2007), An Introduction to Categorical Data Analysis, p.39 (reused in R ?chisq.test),
  // via CHECKS.md §2: X2 = 30.0701491, df = 2, p = 2.9536e-7; tolerance 1e-6 relative (CHECKS §2).
  const std::vector<double> agresti = {762, 327, 468, 484, 239, 477};
  const double x2 = pare::pearson_chi2(agresti, 2, 3, df);
  INFO("Agresti X2 = " << x2);
  CHECK(df == 2);
  CHECK(rel_diff(x2, 30.0701491) <= 1e-6);
  // p printed with 5 significant digits: half a unit of the last digit is 1.7e-5 relative.
  CHECK(rel_diff(pare::chi2_upper_tail(x2, df), 2.9536e-7) <= 2e-5);

  // Empty rows and columns are dropped before df and expected counts (header contract): the same
  // table padded with an empty row and column gives the same statistic and df.
  const std::vector<double> padded = {762, 0, 327, 468, 0, 0, 0, 0, 484, 0, 239, 477};
  int df_padded = -1;
  CHECK(pare::pearson_chi2(padded, 3, 4, df_padded) == Approx(x2).epsilon(1e-14));
  CHECK(df_padded == 2);

  // Aspirin/stroke 2x2 table from scipy's chi2_contingency documentation (Berger et al. 2006),
  // CHECKS.md §2, without the Yates correction: 7.1569009, p = 0.0074676.
  const std::vector<double> aspirin = {176, 230, 21035, 21018};
  const double x2b = pare::pearson_chi2(aspirin, 2, 2, df);
  INFO("aspirin X2 = " << x2b);
  CHECK(df == 1);
  CHECK(rel_diff(x2b, 7.1569009) <= 1e-6);
  CHECK(rel_diff(pare::chi2_upper_tail(x2b, df), 0.0074676) <= 1e-5);  // 5 digits printed

  // Closed form for a 2x2 table (common practice): X2 = N (ad - bc)^2 / (row and column sums).
  const double a = 176, b = 230, c = 21035, d = 21018, n = a + b + c + d;
  const double closed =
      n * (a * d - b * c) * (a * d - b * c) / ((a + b) * (c + d) * (a + c) * (b + d));
  CHECK(rel_diff(x2b, closed) <= 1e-12);

  // A table with one non-empty row has df 0 and statistic 0.
  const std::vector<double> one_row = {5, 7, 0, 0};
  CHECK(pare::pearson_chi2(one_row, 2, 2, df) == 0.0);
  CHECK(df == 0);
}

// ---- CHECKS.md §3: multiple testing -------------------------------------------------------

TEST_CASE("bh_adjust and bonferroni_adjust on the Benjamini-Hochberg 1995 p-values",
          "[ranking][fdr]") {
  // Benjamini & Hochberg (1995), JRSS-B 57(1), thrombolysis example (Neuhaus et al. 1992), the 15
  // p-values of CHECKS.md §3.
  const std::vector<double> p = {0.0001, 0.0004, 0.0019, 0.0095, 0.0201, 0.0278, 0.0298, 0.0344,
                                 0.0459, 0.3240, 0.4262, 0.5719, 0.6528, 0.7590, 1.000};
  const std::vector<double> q = pare::bh_adjust(p);
  REQUIRE(q.size() == p.size());
  // CHECKS §3 adjusted values (statsmodels fdr_bh and R p.adjust("BH")). 0.0638571 is printed
  // with 7 decimals (abs tol 5e-8); the others are exact decimals (1e-12 relative for rounding).
  const double published[] = {0.0015,    0.003,     0.0095, 0.035625, 0.0603,
                              0.0638571, 0.0638571, 0.0645, 0.0765,   0.486};
  for (std::size_t i = 0; i < 10; ++i) {
    INFO("rank " << i + 1 << ": q = " << q[i] << ", published " << published[i]);
    if (i == 5 || i == 6)
      CHECK(std::abs(q[i] - published[i]) <= 5e-8);
    else
      CHECK(rel_diff(q[i], published[i]) <= 1e-12);
  }
  CHECK(q[14] == 1.0);  // CHECKS §3: last 1.0
  // The four values CHECKS §3 elides ("..."), from the step-up definition q_(i) = min_{j>=i}
  // p_(j) m / j (Benjamini & Hochberg 1995), worked by hand: 0.4262*15/11, 0.5719*15/12,
  // 0.6528*15/13, 0.7590*15/14 (each is below the next, so no running minimum applies).
  CHECK(rel_diff(q[10], 0.4262 * 15 / 11) <= 1e-12);
  CHECK(rel_diff(q[11], 0.5719 * 15 / 12) <= 1e-12);
  CHECK(rel_diff(q[12], 0.6528 * 15 / 13) <= 1e-12);
  CHECK(rel_diff(q[13], 0.7590 * 15 / 14) <= 1e-12);
  int rejected_bh = 0;
  for (double v : q) rejected_bh += v <= 0.05;
  CHECK(rejected_bh == 4);  // CHECKS §3: BH rejects 4 at q = 0.05

  const std::vector<double> bonf = pare::bonferroni_adjust(p);
  int rejected_bonf = 0;
  for (std::size_t i = 0; i < p.size(); ++i) {
    INFO("i = " << i);
    CHECK(rel_diff(bonf[i], std::min(1.0, p[i] * 15)) <= 1e-15);  // CHECKS §3: p*15 capped at 1
    rejected_bonf += bonf[i] <= 0.05;
  }
  CHECK(rejected_bonf == 3);  // CHECKS §3: Bonferroni rejects 3

  // Adjusted values follow their p-values when the input is not sorted (here reversed).
  std::vector<double> reversed(p.rbegin(), p.rend());
  const std::vector<double> q_reversed = pare::bh_adjust(reversed);
  for (std::size_t i = 0; i < p.size(); ++i) CHECK(q_reversed[p.size() - 1 - i] == q[i]);
}

// ---- CHECKS.md §4: entropy and discrete mutual information ---------------------------------

TEST_CASE("mutual_information on the Cover & Thomas joint table and entropy examples",
          "[ranking][mi]") {
  // Cover & Thomas, Elements of Information Theory, Example 2.2.1 (CHECKS.md §4): joint table
  // Y x X in 32nds; I(X;Y) = 3/8 bit = 0.2599302 nats; tolerance 1e-12 (CHECKS §4).
  const std::vector<double> joint = {4, 2, 1, 1, 2, 4, 1, 1, 2, 2, 2, 2, 8, 0, 0, 0};
  const double mi = pare::mutual_information(joint, 4, 4);
  INFO("I = " << mi << " nats");
  CHECK(std::abs(mi - 0.375 * kLn2) <= 1e-12);
  CHECK(std::abs(mi - 0.2599302) <= 5e-8);  // the 7-decimal nats value printed in CHECKS §4
  // The table as probabilities (divided by 32) and transposed gives the same value.
  std::vector<double> prob(joint.size()), transposed(joint.size());
  for (std::size_t i = 0; i < joint.size(); ++i) prob[i] = joint[i] / 32;
  for (int r = 0; r < 4; ++r)
    for (int c = 0; c < 4; ++c)
      transposed[static_cast<std::size_t>(c * 4 + r)] = joint[static_cast<std::size_t>(r * 4 + c)];
  CHECK(std::abs(pare::mutual_information(prob, 4, 4) - 0.375 * kLn2) <= 1e-12);
  CHECK(std::abs(pare::mutual_information(transposed, 4, 4) - 0.375 * kLn2) <= 1e-12);

  // Entropy through I(X;X) = H(X) (Cover & Thomas eq. 2.45): a diagonal joint table.
  // Cover & Thomas Ex. 2.1.2: p = (1/2, 1/4, 1/8, 1/8) has H = 1.75 bits; fair coin 1 bit; uniform
  // on 8 outcomes 3 bits; Bernoulli(0.1) 0.4689956 bits (CHECKS §4, recomputed with scipy).
  auto diagonal = [](const std::vector<double>& w) {
    const std::size_t k = w.size();
    std::vector<double> t(k * k, 0.0);
    for (std::size_t i = 0; i < k; ++i) t[i * k + i] = w[i];
    return t;
  };
  CHECK(std::abs(pare::mutual_information(diagonal({4, 2, 1, 1}), 4, 4) - 1.75 * kLn2) <= 1e-12);
  CHECK(std::abs(pare::mutual_information(diagonal({1, 1}), 2, 2) - 1.0 * kLn2) <= 1e-12);
  CHECK(std::abs(pare::mutual_information(diagonal(std::vector<double>(8, 1.0)), 8, 8) -
                 3.0 * kLn2) <= 1e-12);
  // 0.4689956 is printed with 7 decimals: abs tol 5e-8 bits.
  CHECK(std::abs(pare::mutual_information(diagonal({1, 9}), 2, 2) / kLn2 - 0.4689956) <= 5e-8);
  CHECK(std::abs(pare::mutual_information(diagonal({4, 2, 1, 1}), 4, 4) - 1.2130076) <= 5e-8);

  // Independence gives 0 (product table), and an empty table 0.
  const std::vector<double> product = {2, 4, 6, 3, 6, 9};  // (1,1.5)^T x (2,4,6)
  CHECK(pare::mutual_information(product, 2, 3) == Approx(0.0).margin(1e-15));
  const std::vector<double> empty(4, 0.0);
  CHECK(pare::mutual_information(empty, 2, 2) == 0.0);
}

// ---- CHECKS.md §5: kNN mutual information --------------------------------------------------

TEST_CASE("knn_mutual_information on the CHECKS 5 example", "[ranking][knn]") {
  // CHECKS.md §5 (Ross 2014 estimator, values recomputed with sklearn mutual_info_classif and a
  // direct implementation): n = 24, results in nats, tolerance 1e-9 (CHECKS §5).
  const std::vector<double> x = {1.01, 2.52, 3.41, 3.51, 4.35, 4.36,  4.58,  4.95,
                                 5.09, 5.24, 5.47, 5.77, 5.89, 5.93,  6.34,  6.42,
                                 8.08, 8.59, 8.63, 8.76, 8.94, 10.48, 10.96, 11.74};
  const std::vector<int> y = {0, 0, 0, 0, 0, 0, 1, 0, 1, 0, 1, 1,
                              1, 1, 2, 1, 2, 1, 2, 2, 2, 2, 2, 2};
  const double expected[] = {0.5233292094995391, 0.6334823665276961,
                             0.7088130543583839};  // k = 1, 2, 3

  std::vector<double> scaled(x.size());
  for (std::size_t i = 0; i < x.size(); ++i) scaled[i] = x[i] * 37.5 - 100;
  std::vector<double> x_rev(x.rbegin(), x.rend());
  std::vector<int> y_rev(y.rbegin(), y.rend());

  for (int k = 1; k <= 3; ++k) {
    const double want = expected[k - 1];
    const double got = pare::knn_mutual_information(x, y, 3, k);
    INFO("k = " << k << ": " << got << " vs " << want);
    CHECK(std::abs(got - want) <= 1e-9);
    // CHECKS §5: unchanged for x*37.5-100 and for reversed rows.
    CHECK(std::abs(pare::knn_mutual_information(scaled, y, 3, k) - want) <= 1e-9);
    CHECK(std::abs(pare::knn_mutual_information(x_rev, y_rev, 3, k) - want) <= 1e-9);
  }

  // CHECKS §5: "points alone in their class are dropped first (N shrinks)": a fourth class with a
  // single point leaves the estimate unchanged.
  std::vector<double> x_plus = x;
  std::vector<int> y_plus = y;
  x_plus.push_back(5.0);
  y_plus.push_back(3);
  CHECK(std::abs(pare::knn_mutual_information(x_plus, y_plus, 4, 3) - expected[2]) <= 1e-9);
}

TEST_CASE("knn_mutual_information counts tied values and tied distances (Gao et al. 2017)",
          "[ranking][knn]") {
  // The estimator of numerics.md: ball B_i = {|x - x_i| < rho_i} (rho_i > 0) or {x_i} (rho_i =
  // 0), k_i and m_i the points of class(i) and of any class in B_i, x_i included, and
  // MI = psi(N) + <psi(k_i)> - <psi(N_c)> - <psi(m_i)>. psi(n) = H(n - 1) - gamma (H the harmonic
  // numbers), and the gammas cancel (+1 +1 -1 -1), so the values below are exact fractions.
  //
  // (a) All-discrete (Gao et al.'s rho = 0 case), k = 3. Class a: 0 0 0 0 1 1 1 1, class b:
  // 1 1 1 1 2 2 2 2. Every (value, class) group has 4 = k + 1 points, so rho_i = 0 everywhere,
  // k_i = 4, N_c = 8, and m_i = 4 for the values 0 and 2, 8 for the value 1. By hand:
  //   MI = psi(16) + psi(4) - psi(8) - (8 psi(4) + 8 psi(8)) / 16
  //      = H15 + H3 / 2 - 3 H7 / 2 = 1195757/360360 + 11/12 - 1089/280 = 2224/6435 = 0.3456099...
  // next to the plug-in MI of the table, (1/2) ln 2 = 0.3465736. Ross's counting (k_i = 3)
  // gives H15 + H2 - H7 - H3 / 2 - H7 / 2 = 0.0122766: ties pull it towards 0.
  {
    const std::vector<double> x = {0, 0, 0, 0, 1, 1, 1, 1, 1, 1, 1, 1, 2, 2, 2, 2};
    const std::vector<int> y = {0, 0, 0, 0, 0, 0, 0, 0, 1, 1, 1, 1, 1, 1, 1, 1};
    const double got = pare::knn_mutual_information(x, y, 2, 3);
    INFO("discrete case: " << got);
    CHECK(std::abs(got - 2224.0 / 6435.0) <= 1e-14);
    // row order does not matter
    std::vector<double> x_rev(x.rbegin(), x.rend());
    std::vector<int> y_rev(y.rbegin(), y.rend());
    CHECK(std::abs(pare::knn_mutual_information(x_rev, y_rev, 2, 3) - 2224.0 / 6435.0) <= 1e-14);
  }
  // (b) Tied distances (values on a grid), k = 2. Class a: 0 2 4, class b: 10 12 14. The point 2
  // has both same-class neighbours at exactly 2: rho = 2, and only x_i itself is strictly inside,
  // so k_i = 1 and m_i = 1. The points 0 and 4 (and 10, 14) have rho = 4 with k_i = m_i = 2. The
  // classes do not overlap, so k_i = m_i everywhere and MI = psi(6) - psi(3) = H5 - H2 = 47/60,
  // the value of any tie-free data with two separated classes of 3. Ross's counting (k_i = 2
  // for the middle points too) gives psi(6) + psi(2) - psi(3) - (4 psi(2) + 2 psi(1)) / 6 =
  // 67/60 = 1.117, more than H(class) = ln 2.
  {
    const std::vector<double> x = {0, 2, 4, 10, 12, 14};
    const std::vector<int> y = {0, 0, 0, 1, 1, 1};
    const double got = pare::knn_mutual_information(x, y, 2, 2);
    INFO("grid case: " << got);
    CHECK(std::abs(got - 47.0 / 60.0) <= 1e-14);
    // the same configuration without ties (middle points moved off the grid) gives the same
    std::vector<double> jittered = {0, 2.5, 4, 10, 11.5, 14};
    CHECK(std::abs(pare::knn_mutual_information(jittered, y, 2, 2) - 47.0 / 60.0) <= 1e-14);
  }
}

TEST_CASE("kNN MI: a tie-heavy feature unrelated to the class scores below an informative one",
          "[ranking][knn]") {
  // 240 samples, classes alternating a b a b. Column 0: integers (50 i) mod 61, so every value
  // 0..60 is held by about four samples, two of each class: no information about the class, but
  // ties at distance 0 and 1 everywhere. Column 1: N(0, 1) + 1.0 for class b (seeded), continuous;
  // its MI is about 0.1 nats (numerical integration of the two Gaussians, here and in
  // numerics.md). Ross's counting scored column 0 at 0.379 (a direct numpy implementation, the
  // neighbours tied at rho_i counted in k but not in m) - above column 1. The tie rule gives 0
  // (the estimate is negative and clipped; numpy implementation of the same formula).
  const Eigen::Index n = 240;
  Matrix m(n, 2);
  std::vector<std::string> labels;
  std::mt19937_64 rng(2017);
  std::normal_distribution<double> normal(0.0, 1.0);
  for (Eigen::Index i = 0; i < n; ++i) {
    labels.push_back(i % 2 == 0 ? "a" : "b");
    m(i, 0) = static_cast<float>((50 * i) % 61);
    m(i, 1) = static_cast<float>(normal(rng) + (i % 2 == 0 ? 0.0 : 1.0));
  }
  pare::ScoreOptions options;
  options.mi = pare::MiEstimator::kKnn;
  options.threads = 1;
  const FeatureScores s = pare::score_features(m, all_columns(m), classes_of(labels), options);
  INFO("tie-heavy " << s.mi[0] << ", informative " << s.mi[1]);
  CHECK(s.mi[0] == 0.0);
  CHECK(s.mi[1] > 0.03);
  CHECK(pare::rank_order(s, pare::Criterion::kMi) == std::vector<std::size_t>{1, 0});
  // The same column through knn_mutual_information (the values and codes directly).
  std::vector<double> x0(static_cast<std::size_t>(n));
  std::vector<int> y(static_cast<std::size_t>(n));
  for (Eigen::Index i = 0; i < n; ++i) {
    x0[static_cast<std::size_t>(i)] = m(i, 0);
    y[static_cast<std::size_t>(i)] = static_cast<int>(i % 2);
  }
  CHECK(pare::knn_mutual_information(x0, y, 2, 3) == 0.0);
}

// ---- CHECKS.md §6: counts chi-square ------------------------------------------------------

TEST_CASE("score_features counts chi-square on sklearn's test_chi2 example", "[ranking][counts]") {
  // sklearn/feature_selection/tests/test_chi2.py, via CHECKS.md §6:
  // X = [[2,1,2],[9,1,1],[6,1,2],[0,1,2]], y = [0,1,2,2]: scores 123/17, 0, 3/7,
  // p 0.0268458, 1.0, 0.8071178 (p printed with 6 and 7 significant digits: half a unit of the
  // last digit is 1.9e-6 and 6.2e-8 relative, hence 2e-6 and 1e-6).
  Matrix m(4, 3);
  m << 2, 1, 2, 9, 1, 1, 6, 1, 2, 0, 1, 2;
  const ClassCodes classes = classes_of({"0", "1", "2", "2"});
  pare::ScoreOptions options;
  options.counts_chi2 = true;
  options.threads = 1;
  const FeatureScores s = pare::score_features(m, all_columns(m), classes, options);
  REQUIRE(s.chi2_counts.size() == 3);
  INFO("counts = " << s.chi2_counts[0] << ", " << s.chi2_counts[1] << ", " << s.chi2_counts[2]);
  CHECK(rel_diff(s.chi2_counts[0], 123.0 / 17.0) <= 1e-12);
  CHECK(s.chi2_counts[1] == 0.0);
  CHECK(rel_diff(s.chi2_counts[2], 3.0 / 7.0) <= 1e-12);
  INFO("p = " << s.chi2_counts_p[0] << ", " << s.chi2_counts_p[1] << ", " << s.chi2_counts_p[2]);
  CHECK(rel_diff(s.chi2_counts_p[0], 0.0268458) <= 2e-6);
  CHECK(s.chi2_counts_p[1] == 1.0);
  CHECK(rel_diff(s.chi2_counts_p[2], 0.8071178) <= 1e-6);
  // Two classes have one sample each. Classes of any size are scored (SPEC §9; this test once
  // expected F 0 and few_values here): 4 observed values > 3 classes, so F is defined. By hand:
  // class means 2, 9, 3 about the mean 17/4: between = 2.25^2 + 4.75^2 + 2 * 1.25^2 = 30.75,
  // within = 3^2 + 3^2 = 18, F = (30.75 / 2) / (18 / 1) = 0.8541667; scipy.stats.f_oneway([2],
  // [9], [6, 0]) (Debian's scipy 1.10.1) = 0.8541666666666666, p 0.6076436202502001 (1e-12:
  // both evaluate the same incomplete beta to near full precision). The constant column is
  // flagged constant.
  CHECK(s.flags[0] == 0);
  CHECK((s.flags[1] & pare::kScoreConstant) != 0);
  CHECK(rel_diff(s.f[0], 30.75 / 2 / 18) <= 1e-14);
  CHECK(rel_diff(s.f_p[0], 0.6076436202502001) <= 1e-12);
  // BH over the three counts p-values, checked against the step-up definition by hand.
  const double p0 = s.chi2_counts_p[0], p2 = s.chi2_counts_p[2];
  CHECK(rel_diff(s.chi2_counts_q[0], p0 * 3) <= 1e-15);
  CHECK(rel_diff(s.chi2_counts_q[2], std::min(1.0, p2 * 3 / 2)) <= 1e-15);

  // A gap is left out of the class sums and of the class shares (observed cells only, as
  // sklearn.feature_selection.chi2 on the observed rows): a fifth sample of class "0" with a
  // missing value leaves 123/17 unchanged.
  Matrix gap(5, 1);
  gap << 2, 9, 6, 0, std::numeric_limits<float>::quiet_NaN();
  const FeatureScores sg =
      pare::score_features(gap, all_columns(gap), classes_of({"0", "1", "2", "2", "0"}), options);
  INFO("with a gap: " << sg.chi2_counts[0]);
  CHECK(rel_diff(sg.chi2_counts[0], 123.0 / 17.0) <= 1e-12);
  CHECK(sg.missing_rate[0] == Approx(0.2).epsilon(1e-15));

  // Negative values are an input error for the counts statistic.
  Matrix neg = m;
  neg(0, 0) = -1;
  CHECK_THROWS_AS(pare::score_features(neg, all_columns(neg), classes, options), pare::Error);
}

// ---- equal-frequency bins (SPEC §4) -------------------------------------------------------

TEST_CASE("equal_frequency_bins follows the SPEC rank rule", "[ranking][bins]") {
  // SPEC §4: value x of n gets floor(B * L(x) / n), L(x) = values strictly less than x.
  // 1..10, 4 bins, by hand: L = 0..9, floor(4L/10) = 0 0 0 1 1 2 2 2 3 3.
  // Note: CHECKS.md §8 lists 0 0 0 1 1 2 2 3 3 3 for the same input; that is the Hyndman-Fan type 7
  // quantile-edge rule (edges 1, 3.25, 5.5, 7.75, 10; value 8 > 7.75), not the SPEC rank rule,
  // so the two differ at x = 8 by definition.
  std::vector<double> v;
  for (int i = 1; i <= 10; ++i) v.push_back(i);
  CHECK(pare::equal_frequency_bins(v, 4) == std::vector<int>{0, 0, 0, 1, 1, 2, 2, 2, 3, 3});
  // Shuffled input: bins follow the values.
  const std::vector<double> shuffled = {7, 2, 10, 5, 1, 9, 4, 3, 8, 6};
  CHECK(pare::equal_frequency_bins(shuffled, 4) == std::vector<int>{2, 0, 3, 1, 0, 3, 1, 0, 2, 2});

  // Ties share a bin (SPEC §4). By hand: sorted 1 1 2 3 3 4 5 5 6 9, L(1)=0, L(2)=2, L(3)=3,
  // L(4)=5, L(5)=6, L(6)=8, L(9)=9; floor(4L/10) = 0, 0, 1, 2, 2, 3, 3.
  const std::vector<double> ties = {3, 1, 4, 1, 5, 9, 2, 6, 5, 3};
  CHECK(pare::equal_frequency_bins(ties, 4) == std::vector<int>{1, 0, 2, 0, 2, 3, 0, 3, 2, 1});
  // All equal: one bin; -0 and +0 compare equal, so they share a bin.
  CHECK(pare::equal_frequency_bins(std::vector<double>(5, 2.5), 3) == std::vector<int>(5, 0));
  const std::vector<double> zeros = {0.0, -0.0, 1.0, -1.0};
  CHECK(pare::equal_frequency_bins(zeros, 4) == std::vector<int>{1, 1, 3, 0});
  // Cross-check: L(x) = scipy.stats.rankdata(x, method="min") - 1; computed for this test with
  // Debian's scipy 1.10.1: rankdata([3,1,4,1,5,9,2,6,5,3], "min") = 4 1 6 1 7 10 3 9 7 4. With
  // B = n = 10 the bin is L(x) itself.
  const int rank_min[] = {4, 1, 6, 1, 7, 10, 3, 9, 7, 4};
  const std::vector<int> b10 = pare::equal_frequency_bins(ties, 10);
  for (std::size_t i = 0; i < ties.size(); ++i) CHECK(b10[i] == rank_min[i] - 1);
}

TEST_CASE("score_features bins like equal_frequency_bins (binned MI and chi-square)",
          "[ranking][bins]") {
  // Internal consistency: score_features bins float keys itself; its MI and chi-square must equal
  // the table built from equal_frequency_bins (external checks of the same values are in
  // tests/reference/rank_reference.py). Data with ties and a -0/+0 pair.
  const std::vector<double> values = {3, 1, 4, 1, 5, 9, 2, 6, 5, 3, 0.0, -0.0, 7, 7, 2, 8};
  const std::vector<std::string> labels = {"a", "b", "a", "c", "b", "a", "c", "c",
                                           "b", "a", "b", "c", "a", "b", "c", "a"};
  Matrix m(static_cast<Eigen::Index>(values.size()), 1);
  for (std::size_t i = 0; i < values.size(); ++i)
    m(static_cast<Eigen::Index>(i), 0) = static_cast<float>(values[i]);
  const ClassCodes classes = classes_of(labels);
  pare::ScoreOptions options;
  options.bins = 5;
  options.threads = 1;
  const FeatureScores s = pare::score_features(m, all_columns(m), classes, options);
  const std::vector<int> bins = pare::equal_frequency_bins(values, 5);
  std::vector<double> table(5 * 3, 0.0);
  for (std::size_t i = 0; i < values.size(); ++i)
    table[static_cast<std::size_t>(bins[i] * 3 + classes.codes[i])] += 1;
  int df = 0;
  CHECK(s.mi[0] == Approx(pare::mutual_information(table, 5, 3)).epsilon(1e-14));
  CHECK(s.chi2[0] == Approx(pare::pearson_chi2(table, 5, 3, df)).epsilon(1e-14));
  CHECK(s.chi2_df[0] == df);
}

TEST_CASE("score_features with bins >= n equals bins = n, without a huge table",
          "[ranking][bins]") {
  // SPEC §4: for B >= n, floor(B L / n) is strictly increasing in L, so every distinct value has
  // its own bin whatever B is: the table (up to empty rows) and so MI, chi-square and df are those
  // of B = n. A --bins of 2e9 once made a 2e9 x classes table and aborted the program.
  std::mt19937_64 rng(7);
  std::normal_distribution<float> normal(0.0f, 1.0f);
  const Eigen::Index n = 60;
  Matrix m(n, 3);
  std::vector<std::string> labels;
  for (Eigen::Index i = 0; i < n; ++i) {
    labels.push_back(i % 3 == 0 ? "x" : "y");
    m(i, 0) = normal(rng) + (i % 3 == 0 ? 1.0f : 0.0f);
    m(i, 1) = std::round(normal(rng) * 2);  // ties
    m(i, 2) = i == 5 ? std::numeric_limits<float>::quiet_NaN() : normal(rng);
  }
  const ClassCodes classes = classes_of(labels);
  pare::ScoreOptions options;
  options.threads = 1;
  options.bins = static_cast<int>(n);
  const FeatureScores at_n = pare::score_features(m, all_columns(m), classes, options);
  options.bins = 2000000000;
  const FeatureScores huge = pare::score_features(m, all_columns(m), classes, options);
  CHECK(same_bits(at_n.mi, huge.mi));
  CHECK(same_bits(at_n.chi2, huge.chi2));
  CHECK(same_bits(at_n.chi2_p, huge.chi2_p));
  CHECK(same_bits(at_n.chi2_df, huge.chi2_df));
  // And against the definition: bins of equal_frequency_bins with B = 2e9 on column 1 (no gaps).
  std::vector<double> v(static_cast<std::size_t>(n));
  for (Eigen::Index i = 0; i < n; ++i) v[static_cast<std::size_t>(i)] = m(i, 1);
  const std::vector<int> b = pare::equal_frequency_bins(v, 2000000000);
  std::vector<int> distinct(b);
  std::sort(distinct.begin(), distinct.end());
  distinct.erase(std::unique(distinct.begin(), distinct.end()), distinct.end());
  std::vector<double> table(distinct.size() * 2, 0.0);
  for (std::size_t i = 0; i < v.size(); ++i) {
    const auto row = std::lower_bound(distinct.begin(), distinct.end(), b[i]) - distinct.begin();
    table[static_cast<std::size_t>(row) * 2 + static_cast<std::size_t>(classes.codes[i])] += 1;
  }
  int df = 0;
  const double chi2 = pare::pearson_chi2(table, static_cast<int>(distinct.size()), 2, df);
  CHECK(huge.chi2[1] == Approx(chi2).epsilon(1e-13));
  CHECK(huge.chi2_df[1] == df);
  CHECK(
      huge.mi[1] ==
      Approx(pare::mutual_information(table, static_cast<int>(distinct.size()), 2)).epsilon(1e-13));
}

// ---- score_features: degenerate features --------------------------------------------------

TEST_CASE("score_features flags degenerate features and never returns NaN",
          "[ranking][degenerate]") {
  // 12 samples, 3 classes of 4. Columns:
  //  0 informative; 1 constant; 2 all missing; 3 class "b" has one observed value (scored: SPEC
  //  §9, classes of any size); 4 constant within every class but not overall (F infinite);
  //  5 informative with gaps; 6 a single observed value.
  const std::vector<std::string> labels = {"a", "a", "a", "a", "b", "b",
                                           "b", "b", "c", "c", "c", "c"};
  const ClassCodes classes = classes_of(labels);
  const float nan = std::numeric_limits<float>::quiet_NaN();
  Matrix m(12, 7);
  for (int i = 0; i < 12; ++i) {
    const int c = classes.codes[static_cast<std::size_t>(i)];
    m(i, 0) = static_cast<float>(c * 2 + (i % 4) * 0.5);
    m(i, 1) = 4.0f;
    m(i, 2) = nan;
    m(i, 3) = (c == 1 && i != 4) ? nan : static_cast<float>(i);
    m(i, 4) = static_cast<float>(c * 10);
    m(i, 5) = (i % 3 == 0) ? nan : static_cast<float>(c + (i % 2));
    m(i, 6) = i == 0 ? 1.0f : nan;
  }
  for (auto estimator : {pare::MiEstimator::kBinned, pare::MiEstimator::kKnn}) {
    pare::ScoreOptions options;
    options.mi = estimator;
    options.counts_chi2 = true;
    options.threads = 2;
    const FeatureScores s = pare::score_features(m, all_columns(m), classes, options);
    INFO("estimator " << (estimator == pare::MiEstimator::kKnn ? "knn" : "binned"));
    for (const auto& [name, vec] : score_vectors(s)) {
      REQUIRE(vec->size() == 7);
      for (std::size_t j = 0; j < 7; ++j) {
        INFO(name << "[" << j << "] = " << (*vec)[j]);
        CHECK_FALSE(std::isnan((*vec)[j]));
      }
    }
    // Informative column: no flags, positive scores, small p.
    CHECK(s.flags[0] == 0);
    CHECK(s.mi[0] > 0);
    CHECK(s.f_p[0] < 1e-3);
    // Constant column (header: scores 0, p-values 1, flag constant).
    CHECK(s.flags[1] == pare::kScoreConstant);
    for (std::size_t j : {std::size_t{1}, std::size_t{2}, std::size_t{6}}) {
      INFO("degenerate column " << j);
      CHECK(s.mi[j] == 0.0);
      CHECK(s.chi2[j] == 0.0);
      CHECK(s.chi2_p[j] == 1.0);
      CHECK(s.f[j] == 0.0);
      CHECK(s.f_p[j] == 1.0);
      CHECK(s.chi2_q[j] == 1.0);
      CHECK(s.f_q[j] == 1.0);
    }
    // All missing: every class has no observed value, and no variance; missing rate 1.
    CHECK((s.flags[2] & pare::kScoreFewValues) != 0);
    CHECK((s.flags[2] & pare::kScoreConstant) != 0);
    CHECK(s.missing_rate[2] == 1.0);
    CHECK(s.variance[2] == 0.0);
    CHECK(s.chi2_counts[2] == 0.0);
    CHECK(s.chi2_counts_p[2] == 1.0);
    // One observed value in class b: 0 1 2 3 | 4 | 8 9 10 11. This test once expected every
    // score 0 and few_values here; classes of any size are scored now (SPEC §9). F by hand: class
    // means 1.5, 4, 9.5 about 48/9; between = 4 (1.5 - 48/9)^2 + (4 - 48/9)^2 + 4 (9.5 - 48/9)^2
    // = 130, within = 5 + 0 + 5 = 10, F = (130 / 2) / (10 / 6) = 39; scipy.stats.f_oneway([0, 1,
    // 2, 3], [4], [8, 9, 10, 11]) = 39.0, p 0.0003644314868804664. Each of the 9 values has its
    // own bin (10 bins), so the 9 x 3 table's chi-square is 9 * (3 - 1) = 18 with df 16 (scipy
    // chi2_contingency: 17.999999999999996, p 0.32389696431289655) and MI = H(class) =
    // (4/9) ln(9/4) * 2 + (1/9) ln 9 = 0.96496292300742759 (sklearn mutual_info_score).
    CHECK(s.flags[3] == 0);
    CHECK(s.missing_rate[3] == Approx(3.0 / 12.0).epsilon(1e-15));
    CHECK(rel_diff(s.f[3], 39.0) <= 1e-14);
    CHECK(rel_diff(s.f_p[3], 0.0003644314868804664) <= 1e-12);
    CHECK(rel_diff(s.chi2[3], 18.0) <= 1e-14);
    CHECK(s.chi2_df[3] == 16);
    CHECK(rel_diff(s.chi2_p[3], 0.32389696431289655) <= 1e-12);
    if (estimator == pare::MiEstimator::kBinned)
      CHECK(rel_diff(s.mi[3], 2 * (4.0 / 9) * std::log(9.0 / 4) + std::log(9.0) / 9) <= 1e-14);
    // Separates the classes exactly: F infinite with p 0, flagged; the chi-square is still
    // computed.
    CHECK(s.flags[4] == pare::kScoreSeparates);
    CHECK(std::isinf(s.f[4]));
    CHECK(s.f_p[4] == 0.0);
    CHECK(s.chi2[4] > 0.0);
    // Single observed value: missing rate 11/12, variance 0 (not NaN).
    CHECK(s.missing_rate[6] == Approx(11.0 / 12.0).epsilon(1e-15));
    CHECK(s.variance[6] == 0.0);
  }

  // Fewer than two classes, bins < 2 and k < 1 are errors (header contract).
  const ClassCodes one = classes_of(std::vector<std::string>(12, "a"));
  pare::ScoreOptions options;
  CHECK_THROWS_AS(pare::score_features(m, all_columns(m), one, options), pare::Error);
  options.bins = 1;
  CHECK_THROWS_AS(pare::score_features(m, all_columns(m), classes, options), pare::Error);
  options.bins = 10;
  options.neighbors = 0;
  CHECK_THROWS_AS(pare::score_features(m, all_columns(m), classes, options), pare::Error);
}

// ---- classes of any size (SPEC §9) ----------------------------------------------------------

namespace {

// A Debian python3-sklearn dataset (CHECKS.md §10) as float32 columns and class labels: `header`
// lines skipped, then comma-separated values with the class last; gzip is inflated. Returns
// false when the file is missing outside CI (a failure under CI=true; scripts/install-deps.sh
// installs python3-sklearn).
bool read_sklearn_data(const std::string& name, int header, Matrix& x,
                       std::vector<std::string>& labels) {
  const std::string path = "/usr/lib/python3/dist-packages/sklearn/datasets/data/" + name;
  std::string text;
  try {
    text = pare::read_file_text(path);
  } catch (const std::exception&) {
    const char* ci = std::getenv("CI");
    INFO("dataset file " << path << " is missing; CI=true makes that a failure");
    REQUIRE_FALSE((ci != nullptr && std::string(ci) == "true"));
    WARN("skipped: " << path << " not found (install python3-sklearn)");
    return false;
  }
  std::vector<std::vector<float>> rows;
  std::istringstream in(text);
  std::string line;
  for (int i = 0; i < header; ++i) std::getline(in, line);
  while (std::getline(in, line)) {
    if (line.empty()) continue;
    const std::vector<std::string> fields = pare::split_fields(line, ',');
    std::vector<float> row;
    // std::stod then float, as numpy's float32(float(text)) in the reference computation
    for (std::size_t j = 0; j + 1 < fields.size(); ++j)
      row.push_back(static_cast<float>(std::stod(fields[j])));
    rows.push_back(std::move(row));
    labels.push_back(std::to_string(static_cast<int>(std::stod(fields.back()))));
  }
  x.resize(static_cast<Eigen::Index>(rows.size()), static_cast<Eigen::Index>(rows.front().size()));
  for (std::size_t i = 0; i < rows.size(); ++i)
    for (std::size_t j = 0; j < rows[i].size(); ++j)
      x(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(j)) = rows[i][j];
  return true;
}

}  // namespace

TEST_CASE("score_features scores classes of one sample (wine, digits) as scipy does",
          "[ranking][classes]") {
  // SPEC §9: classes of any size are scored. Once, one class with a single sample made every
  // feature few_values with all scores 0 (so the ranking was the file order).
  // Reference values computed for this test with Debian's scipy 1.10.1 / sklearn 1.2.1 on the
  // same float32 values: mi = sklearn.metrics.mutual_info_score on the SPEC §4 bins (10),
  // chi2/p/df = scipy.stats.chi2_contingency(correction=False) on the bin x class table,
  // f/p = scipy.stats.f_oneway over the classes. Tolerance 1e-10 relative: the same formulas in
  // double, differing only in summation order and in the incomplete gamma/beta evaluations.
  struct Expected {
    int column;
    double mi, chi2, chi2_p;
    int df;
    double f, f_p;
  };
  auto check = [](const FeatureScores& s, const Expected& e) {
    const auto j = static_cast<std::size_t>(e.column);
    INFO("column " << e.column << ": mi " << s.mi[j] << " chi2 " << s.chi2[j] << " p "
                   << s.chi2_p[j] << " df " << s.chi2_df[j] << " f " << s.f[j] << " p " << s.f_p[j]
                   << " flags " << static_cast<int>(s.flags[j]));
    CHECK(s.flags[j] == 0);
    CHECK(rel_diff(s.mi[j], e.mi) <= 1e-10);
    CHECK(rel_diff(s.chi2[j], e.chi2) <= 1e-10);
    CHECK(rel_diff(s.chi2_p[j], e.chi2_p) <= 1e-10);
    CHECK(s.chi2_df[j] == e.df);
    CHECK(rel_diff(s.f[j], e.f) <= 1e-10);
    CHECK(rel_diff(s.f_p[j], e.f_p) <= 1e-10);
    for (auto c : {pare::Criterion::kMi, pare::Criterion::kChi2, pare::Criterion::kF})
      CHECK(pare::criterion_defined(s, c, j));
  };
  pare::ScoreOptions options;
  options.threads = 2;

  SECTION("wine, sample 1 relabelled as a fourth class of its own (58/71/48/1)") {
    Matrix x;
    std::vector<std::string> labels;
    if (!read_sklearn_data("wine_data.csv", 1, x, labels)) return;
    REQUIRE(x.rows() == 178);
    REQUIRE(x.cols() == 13);
    labels[0] = "solo";
    const ClassCodes classes = classes_of(labels);
    REQUIRE(classes.classes.size() == 4);
    const FeatureScores s = pare::score_features(x, all_columns(x), classes, options);
    // columns 0 (alcohol), 6 (flavanoids), 12 (proline)
    check(s, {0, 0.48263153623208133, 150.11383866782853, 4.900324505044674e-19, 27,
              90.31183269005858, 2.7789507241514562e-35});
    check(s, {6, 0.67592553870016303, 221.51195636517147, 1.8715630807692252e-32, 27,
              155.08660975290533, 6.1639350319820882e-49});
    check(s, {12, 0.59722252520483565, 184.35059557447289, 2.2687420815645931e-25, 27,
              137.92009100650714, 9.0417507912934567e-46});
    for (std::size_t j = 0; j < s.size(); ++j) CHECK(s.flags[j] == 0);
  }
  SECTION("digits, first 300 rows with every 9 but the first left out: 10 classes, one of 1") {
    Matrix all;
    std::vector<std::string> all_labels;
    if (!read_sklearn_data("digits.csv.gz", 0, all, all_labels)) return;
    REQUIRE(all.rows() == 1797);
    std::vector<Eigen::Index> rows;
    bool nine_seen = false;
    for (Eigen::Index i = 0; i < 300; ++i) {
      if (all_labels[static_cast<std::size_t>(i)] == "9") {
        if (nine_seen) continue;
        nine_seen = true;
      }
      rows.push_back(i);
    }
    REQUIRE(rows.size() == 270);  // numpy: class counts 31 30 29 29 29 32 29 29 31 1
    Matrix x(static_cast<Eigen::Index>(rows.size()), all.cols());
    std::vector<std::string> labels;
    for (std::size_t r = 0; r < rows.size(); ++r) {
      x.row(static_cast<Eigen::Index>(r)) = all.row(rows[r]);
      labels.push_back(all_labels[static_cast<std::size_t>(rows[r])]);
    }
    const ClassCodes classes = classes_of(labels);
    REQUIRE(classes.classes.size() == 10);
    const FeatureScores s = pare::score_features(x, all_columns(x), classes, options);
    check(s, {20, 0.48428740558428418, 238.61244715701224, 4.7761537706725184e-25, 54,
              32.005452965070681, 1.9588306530500564e-37});
    check(s, {33, 0.39108425267647084, 189.00852297753389, 1.4549595086886926e-19, 45,
              31.664831113798197, 3.9908730120790338e-37});
    check(s, {42, 0.59051315087076794, 282.30650774027265, 1.179903276086952e-32, 54,
              55.265206785541501, 2.2978747143825961e-55});
    // pixel 0 is 0 in every image: constant, nothing defined but the variance
    CHECK(s.flags[0] == pare::kScoreConstant);
    for (auto c : {pare::Criterion::kMi, pare::Criterion::kChi2, pare::Criterion::kF})
      CHECK_FALSE(pare::criterion_defined(s, c, 0));
    CHECK(pare::criterion_defined(s, pare::Criterion::kVariance, 0));
  }
}

TEST_CASE("F needs more observed values than observed classes; MI and chi-square do not",
          "[ranking][classes]") {
  // Columns over 6 samples, classes a a b b c c:
  //  0: one value per class observed (1, -, 5, -, 9, -): n = 3 = classes, F undefined
  //     (df2 = 0): few_values, F 0, p 1. The 3 x 3 table is diagonal with ones, so by hand
  //     chi-square = 3 * (1 - 1/3)^2 / (1/3) + 6 * (1/3)^2 / (1/3) = 4 + 2 = 6, df 4, and
  //     MI = ln 3 (the class is a function of the bin, three equally likely classes).
  //  1: class c unobserved (1, 2, 5, 7, -, -): F over the two observed classes, by hand: means
  //     1.5 and 6 about 3.75, between = 2 * 2.25^2 * 2 = 20.25, within = 0.5 + 2 = 2.5, df 1 and 2,
  //     F = 20.25 / 1.25 = 16.2 (scipy.stats.f_oneway([1, 2], [5, 7]) = 16.2, p 0.05654...).
  //  2: a single observed class (1, 2, -, -, -, -): F undefined, chi-square df 0 (one column),
  //     MI 0: nothing but the variance is defined.
  const float nan = std::numeric_limits<float>::quiet_NaN();
  Matrix m(6, 3);
  m << 1, 1, 1,  //
      nan, 2, 2,   //
      5, 5, nan,   //
      nan, 7, nan, //
      9, nan, nan, //
      nan, nan, nan;
  const ClassCodes classes = classes_of({"a", "a", "b", "b", "c", "c"});
  for (auto estimator : {pare::MiEstimator::kBinned, pare::MiEstimator::kKnn}) {
    INFO("estimator " << (estimator == pare::MiEstimator::kKnn ? "knn" : "binned"));
    pare::ScoreOptions options;
    options.mi = estimator;
    options.threads = 1;
    const FeatureScores s = pare::score_features(m, all_columns(m), classes, options);
    CHECK(s.flags[0] == pare::kScoreFewValues);
    CHECK(s.f[0] == 0.0);
    CHECK(s.f_p[0] == 1.0);
    CHECK(rel_diff(s.chi2[0], 6.0) <= 1e-14);
    CHECK(s.chi2_df[0] == 4);
    CHECK(rel_diff(s.chi2_p[0], std::exp(-3.0) * (1 + 3.0)) <= 1e-12);  // df 4: e^(-x/2)(1 + x/2)
    CHECK_FALSE(pare::criterion_defined(s, pare::Criterion::kF, 0));
    CHECK(pare::criterion_defined(s, pare::Criterion::kChi2, 0));
    if (estimator == pare::MiEstimator::kBinned) {
      CHECK(rel_diff(s.mi[0], std::log(3.0)) <= 1e-14);
      CHECK(pare::criterion_defined(s, pare::Criterion::kMi, 0));
    } else {
      // every class has one observed value: the kNN estimator leaves them all out
      CHECK(s.mi[0] == 0.0);
      CHECK_FALSE(pare::criterion_defined(s, pare::Criterion::kMi, 0));
    }

    CHECK(s.flags[1] == 0);
    CHECK(rel_diff(s.f[1], 16.2) <= 1e-14);
    // F(1, 2) upper tail in closed form: 1 - sqrt(F / (F + 2)) (t distribution with 2 df,
    // textbook identity recalled from memory; scipy.stats.f.sf(16.2, 1, 2) = 0.056543...).
    CHECK(rel_diff(s.f_p[1], 1 - std::sqrt(16.2 / 18.2)) <= 1e-12);
    CHECK(pare::criterion_defined(s, pare::Criterion::kF, 1));

    CHECK(s.flags[2] == pare::kScoreFewValues);
    CHECK(s.chi2_df[2] == 0);
    CHECK(s.chi2[2] == 0.0);
    CHECK(s.mi[2] == 0.0);
    for (auto c : {pare::Criterion::kMi, pare::Criterion::kChi2, pare::Criterion::kF})
      CHECK_FALSE(pare::criterion_defined(s, c, 2));
    CHECK(pare::criterion_defined(s, pare::Criterion::kVariance, 2));
  }
}

TEST_CASE("score_features with an infinite value: rank-based scores only",
          "[ranking][degenerate]") {
  // With --allow-inf a feature may hold inf. Class means and distances are then undefined, so F,
  // the counts chi-square and the kNN MI must not claim anything (they once gave F = inf, p = 0,
  // separates_classes, and NaN counts). The bins depend only on the order of the values, so the
  // binned MI and chi-square equal those of the same column with inf replaced by 1e30.
  const std::vector<std::string> labels = {"a", "a", "a", "a", "b", "b", "b", "b"};
  const ClassCodes classes = classes_of(labels);
  Matrix m(8, 3);
  const float values[] = {1, 2, 3, 4, 2.5f, 5, 6, 7};
  for (int i = 0; i < 8; ++i) {
    m(i, 0) = m(i, 1) = m(i, 2) = values[i];
  }
  m(7, 0) = std::numeric_limits<float>::infinity();
  m(7, 1) = 1e30f;
  m(0, 2) = -std::numeric_limits<float>::infinity();
  for (auto estimator : {pare::MiEstimator::kBinned, pare::MiEstimator::kKnn}) {
    INFO("estimator " << (estimator == pare::MiEstimator::kKnn ? "knn" : "binned"));
    pare::ScoreOptions options;
    options.mi = estimator;
    options.bins = 4;
    options.counts_chi2 = false;
    options.threads = 1;
    const FeatureScores s = pare::score_features(m, all_columns(m), classes, options);
    for (std::size_t j : {std::size_t{0}, std::size_t{2}}) {
      INFO("column " << j);
      CHECK(s.f[j] == 0.0);
      CHECK(s.f_p[j] == 1.0);
      CHECK((s.flags[j] & pare::kScoreSeparates) == 0);
      CHECK(s.chi2[j] == s.chi2[1]);
      CHECK(s.chi2_df[j] == s.chi2_df[1]);
      if (estimator == pare::MiEstimator::kBinned)
        CHECK(s.mi[j] == s.mi[1]);
      else
        CHECK(s.mi[j] == 0.0);
      // The variance of a column with inf is NaN (stats.h); ranking by variance puts it last.
      CHECK(std::isnan(s.variance[j]));
    }
    CHECK(s.f[1] > 0);
    CHECK(pare::rank_order(s, pare::Criterion::kVariance) == std::vector<std::size_t>{1, 0, 2});
  }
  // Counts chi-square: +inf is non-negative but its class sum is infinite: 0, p 1, never NaN.
  pare::ScoreOptions options;
  options.counts_chi2 = true;
  Matrix pos = m.leftCols(2);
  const FeatureScores c = pare::score_features(pos, all_columns(pos), classes, options);
  CHECK(c.chi2_counts[0] == 0.0);
  CHECK(c.chi2_counts_p[0] == 1.0);
  CHECK(c.chi2_counts[1] > 0.0);
}

// ---- score_features: thread count does not change the output (SPEC §5) ----------------------

TEST_CASE("score_features gives bit-identical results for 1 and 2 threads", "[ranking][threads]") {
  // A random 200 x 3000 non-negative matrix (so the counts chi-square applies) with ~5% gaps,
  // some ties (values rounded to 0.25), three classes; seeded, so the test is reproducible.
  const Eigen::Index n = 200, p = 3000;
  std::mt19937_64 rng(20240611);
  std::gamma_distribution<float> gamma(2.0f, 1.5f);
  std::uniform_real_distribution<float> unit(0.0f, 1.0f);
  std::vector<std::string> labels(static_cast<std::size_t>(n));
  for (Eigen::Index i = 0; i < n; ++i)
    labels[static_cast<std::size_t>(i)] = std::string(1, static_cast<char>('a' + i % 3));
  const ClassCodes classes = classes_of(labels);
  Matrix m(n, p);
  for (Eigen::Index j = 0; j < p; ++j)
    for (Eigen::Index i = 0; i < n; ++i) {
      float v = gamma(rng) +
                (j % 7 == 0 ? 1.0f * static_cast<float>(classes.codes[static_cast<std::size_t>(i)])
                            : 0.0f);
      if (j % 5 == 0) v = std::round(v * 4) / 4;
      m(i, j) = unit(rng) < 0.05f ? std::numeric_limits<float>::quiet_NaN() : v;
    }
  for (auto estimator : {pare::MiEstimator::kBinned, pare::MiEstimator::kKnn}) {
    INFO("estimator " << (estimator == pare::MiEstimator::kKnn ? "knn" : "binned"));
    pare::ScoreOptions options;
    options.mi = estimator;
    options.counts_chi2 = true;
    options.threads = 1;
    const FeatureScores one = pare::score_features(m, all_columns(m), classes, options);
    options.threads = 2;
    const FeatureScores two = pare::score_features(m, all_columns(m), classes, options);
    const auto a = score_vectors(one), b = score_vectors(two);
    REQUIRE(a.size() == b.size());
    for (std::size_t v = 0; v < a.size(); ++v) {
      INFO(a[v].first);
      CHECK(same_bits(*a[v].second, *b[v].second));
    }
    CHECK(same_bits(one.chi2_df, two.chi2_df));
    CHECK(same_bits(one.flags, two.flags));
    CHECK(same_bits(one.feature, two.feature));
    // And the planted signal is found: the mean F of shifted columns beats the others.
    double shifted = 0, plain = 0;
    int n_shifted = 0;
    for (Eigen::Index j = 0; j < p; ++j) {
      (j % 7 == 0 ? shifted : plain) += one.f[static_cast<std::size_t>(j)];
      n_shifted += j % 7 == 0;
    }
    CHECK(shifted / n_shifted > 3 * plain / static_cast<double>(p - n_shifted));
  }
}

// ---- rank_order --------------------------------------------------------------------------

TEST_CASE("rank_order sorts descending and keeps input order on ties", "[ranking][order]") {
  FeatureScores s;
  const std::size_t p = 6;
  s.feature = {0, 1, 2, 3, 4, 5};
  s.mi = {0.5, 0.7, 0.5, 0.7, 0.1, 0.0};
  s.chi2 = {1, 1, 1, 1, 1, 1};
  s.f = {2.0, std::numeric_limits<double>::infinity(), 2.0, 0.0, 5.0, 2.0};
  s.variance = {3, 3, 1, 2, 3, 0};
  s.chi2_counts = {0, 9, 0, 9, 9, 0};
  s.chi2_p.assign(p, 1);
  s.chi2_q.assign(p, 1);
  s.f_p.assign(p, 1);
  s.f_q.assign(p, 1);
  s.missing_rate.assign(p, 0);
  using V = std::vector<std::size_t>;
  CHECK(pare::rank_order(s, pare::Criterion::kMi) == V{1, 3, 0, 2, 4, 5});
  CHECK(pare::rank_order(s, pare::Criterion::kChi2) == V{0, 1, 2, 3, 4, 5});  // all tied
  CHECK(pare::rank_order(s, pare::Criterion::kF) == V{1, 4, 0, 2, 5, 3});
  CHECK(pare::rank_order(s, pare::Criterion::kVariance) == V{0, 1, 4, 3, 2, 5});
  CHECK(pare::rank_order(s, pare::Criterion::kChi2Counts) == V{1, 3, 4, 0, 2, 5});
}

TEST_CASE("parse_criterion accepts the five names and rejects others", "[ranking][order]") {
  for (const char* name : {"mi", "chi2", "chi2-counts", "f", "variance"})
    CHECK(std::string(pare::criterion_name(pare::parse_criterion(name))) == name);
  try {
    pare::parse_criterion("anova");
    FAIL("no error");
  } catch (const pare::Error& e) {
    CHECK(e.kind() == pare::ErrorKind::kUsage);
  }
}

TEST_CASE("mutual_information and chi-square give equal tables equal bits", "[ranking]") {
  // Two tables that are row and column permutations of each other have equal MI and chi-square
  // in exact arithmetic; summing in a fixed (sorted) order makes the doubles equal too, so ranking
  // ties fall to input order. Seeded random count tables, 10 bins x 3 classes.
  std::mt19937_64 rng(5);
  for (int trial = 0; trial < 200; ++trial) {
    std::vector<double> a(30), b(30);
    for (auto& v : a) v = static_cast<double>(rng() % 40);
    std::vector<int> row_order(10), col_order(3);
    std::iota(row_order.begin(), row_order.end(), 0);
    std::iota(col_order.begin(), col_order.end(), 0);
    std::shuffle(row_order.begin(), row_order.end(), rng);
    std::shuffle(col_order.begin(), col_order.end(), rng);
    for (int r = 0; r < 10; ++r)
      for (int c = 0; c < 3; ++c)
        b[static_cast<std::size_t>(r * 3 + c)] =
            a[static_cast<std::size_t>(row_order[static_cast<std::size_t>(r)] * 3 + col_order[static_cast<std::size_t>(c)])];
    REQUIRE(pare::mutual_information(a, 10, 3) == pare::mutual_information(b, 10, 3));
    int da = 0, db = 0;
    REQUIRE(pare::pearson_chi2(a, 10, 3, da) == pare::pearson_chi2(b, 10, 3, db));
    REQUIRE(da == db);
  }
}

TEST_CASE("the binned table of score_features is the table of equal_frequency_bins", "[ranking][bins]") {
  using Eigen::Index;
  // score_features builds the bin x class table from the bins' thresholds (a radix select of the
  // order statistics, src/class_scores.cpp), not from sorted rows. Reference: equal_frequency_bins
  // (the SPEC rank rule, tested above) and a table counted here; MI and chi-square must be the same
  // bits, and F those of a run without thresholds. Columns: continuous, heavy ties (values 0..4), mostly zeros, negative and -0/+0, a wide
  // range of magnitudes, with gaps; bins from 2 to above n.
  std::mt19937_64 gen(20261205);
  const Index n = 301;
  const int k = 3;
  std::vector<std::string> labels;
  for (Index i = 0; i < n; ++i) labels.push_back(std::string(1, static_cast<char>('a' + (i * 7 + i / 5) % k)));
  const ClassCodes classes = pare::encode_classes(labels);
  std::normal_distribution<float> normal(0.0f, 1.0f);
  std::uniform_int_distribution<int> small(0, 4);
  std::uniform_real_distribution<double> unit(0.0, 1.0);
  Matrix m(n, 5);
  for (Index i = 0; i < n; ++i) {
    m(i, 0) = normal(gen);
    m(i, 1) = static_cast<float>(small(gen));
    m(i, 2) = unit(gen) < 0.85 ? 0.0f : static_cast<float>(small(gen) + 1);
    m(i, 3) = unit(gen) < 0.1 ? (unit(gen) < 0.5 ? -0.0f : 0.0f) : -std::abs(normal(gen));
    m(i, 4) = static_cast<float>(std::exp(12.0 * normal(gen)));
    for (Index j = 0; j < 5; ++j)
      if (unit(gen) < 0.05) m(i, j) = std::numeric_limits<float>::quiet_NaN();
  }
  const std::vector<std::int64_t> features{0, 1, 2, 3, 4};
  // F does not depend on the bins: every run must give the bits of a run with bins >= n (where
  // the table comes from sorted rows, not thresholds).
  pare::ScoreOptions by_rank;
  by_rank.bins = 1000;
  const FeatureScores f_reference = pare::score_features(m, features, classes, by_rank);
  for (const int bins : {2, 3, 7, 10, 33, 64, 65, 100, 299, 400}) {
    pare::ScoreOptions o;
    o.bins = bins;
    const FeatureScores s = pare::score_features(m, features, classes, o);
    for (Index j = 0; j < 5; ++j) {
      std::vector<double> values;
      std::vector<int> codes;
      for (Index i = 0; i < n; ++i)
        if (!std::isnan(m(i, j))) {
          values.push_back(static_cast<double>(m(i, j)) + 0.0);
          codes.push_back(classes.codes[static_cast<std::size_t>(i)]);
        }
      const auto observed = static_cast<int>(values.size());
      const int rows = std::min(bins, observed);  // bins >= n: one bin per rank (the same table)
      const std::vector<int> bin = pare::equal_frequency_bins(values, observed <= bins ? observed : bins);
      std::vector<double> table(static_cast<std::size_t>(rows * k), 0.0);
      for (std::size_t i = 0; i < values.size(); ++i) table[static_cast<std::size_t>(bin[i] * k + codes[i])] += 1;
      int df = 0;
      const double chi2 = pare::pearson_chi2(table, rows, k, df);
      INFO("bins " << bins << ", column " << j);
      CHECK(s.mi[static_cast<std::size_t>(j)] == pare::mutual_information(table, rows, k));
      CHECK(s.chi2[static_cast<std::size_t>(j)] == chi2);
      CHECK(s.chi2_df[static_cast<std::size_t>(j)] == df);
      CHECK(s.f[static_cast<std::size_t>(j)] == f_reference.f[static_cast<std::size_t>(j)]);
      CHECK(s.f_p[static_cast<std::size_t>(j)] == f_reference.f_p[static_cast<std::size_t>(j)]);
    }
  }
}
