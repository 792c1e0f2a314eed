// pare::column_stats, compute_column_stats and missing_per_row against published values
// (/work/shared/CHECKS.md §7) and closed forms.
#include "pare/stats.h"

#include <cmath>    // std::isnan, std::sqrt, std::abs
#include <cstring>  // std::memcmp
#include <limits>   // std::numeric_limits
#include <random>   // std::mt19937_64
#include <span>     // std::span
#include <vector>   // std::vector

#include <catch2/catch.hpp>

namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr float kNaNf = std::numeric_limits<float>::quiet_NaN();

pare::ColumnStats stats(const std::vector<double>& v) {
  return pare::column_stats(std::span<const double>(v));
}
pare::ColumnStats stats(const std::vector<float>& v) {
  return pare::column_stats(std::span<const float>(v));
}

bool rel_close(double got, double want, double tol) {
  return std::abs(got - want) <= tol * std::abs(want);
}

// Identical doubles, bit for bit (so NaN equals NaN).
bool same(double a, double b) {
  return std::memcmp(&a, &b, sizeof a) == 0;
}

bool same(const pare::ColumnStats& a, const pare::ColumnStats& b) {
  return a.n == b.n && a.missing == b.missing && same(a.mean, b.mean) &&
         same(a.variance, b.variance) && same(a.min, b.min) && same(a.max, b.max);
}

// NIST StRD NumAcc3/NumAcc4 layout: `centre`, then 500 pairs (centre - 0.1, centre + 0.1).
std::vector<double> numacc(double first, double low, double high) {
  std::vector<double> v{first};
  for (int k = 0; k < 500; ++k) {
    v.push_back(low);
    v.push_back(high);
  }
  return v;
}

// Anscombe (1973), The American Statistician 27(1); as listed in CHECKS.md §7.
const std::vector<double> kAnscombeX1 = {10, 8, 13, 9, 11, 14, 6, 4, 12, 7, 5};
const std::vector<double> kAnscombeY1 = {8.04, 6.95, 7.58,  8.81, 8.33, 9.96,
                                         7.24, 4.26, 10.84, 4.82, 5.68};
const std::vector<double> kAnscombeX4 = {8, 8, 8, 8, 8, 8, 8, 19, 8, 8, 8};
const std::vector<double> kAnscombeY4 = {6.58, 5.76,  7.71, 8.84, 8.47, 7.04,
                                         5.25, 12.50, 5.56, 7.91, 6.89};

}  // namespace

TEST_CASE("variance of 1e9+4, 1e9+7, 1e9+13, 1e9+16 is 30", "[stats]") {
  // Source: CHECKS.md §7, Wikipedia "Algorithms for calculating variance" (mean 1e9+10, sample
  // variance 30; the naive sum-of-squares formula gives -170.67). Every value, sum and deviation
  // is an integer below 2^53, so a stable method is exact here.
  const pare::ColumnStats s = stats(std::vector<double>{1e9 + 4, 1e9 + 7, 1e9 + 13, 1e9 + 16});
  INFO("mean " << s.mean << " variance " << s.variance);
  REQUIRE(s.n == 4);
  REQUIRE(s.missing == 0);
  REQUIRE(s.mean == 1e9 + 10);
  REQUIRE(s.variance == 30.0);
  REQUIRE(s.min == 1e9 + 4);
  REQUIRE(s.max == 1e9 + 16);
}

TEST_CASE("NIST StRD NumAcc1: mean 10000002, sd 1", "[stats]") {
  // Source: NIST StRD univariate summary statistics, NumAcc1 certified values (CHECKS.md §7).
  // Exact: the values are integers below 2^24, so float32 holds them exactly too, and all sums in
  // double are exact integers.
  const pare::ColumnStats d = stats(std::vector<double>{10000001, 10000003, 10000002});
  INFO("double: mean " << d.mean << " variance " << d.variance);
  REQUIRE(d.mean == 10000002.0);
  REQUIRE(d.variance == 1.0);
  const pare::ColumnStats f = stats(std::vector<float>{10000001.0f, 10000003.0f, 10000002.0f});
  INFO("float: mean " << f.mean << " variance " << f.variance);
  REQUIRE(f.mean == 10000002.0);
  REQUIRE(f.variance == 1.0);
}

TEST_CASE("NIST StRD NumAcc3: mean 1000000.2, sd 0.1", "[stats]") {
  // Source: NIST StRD NumAcc3 certified values (CHECKS.md §7): 1000000.2, then 500 x (1000000.1,
  // 1000000.3). Tolerance on sd 1e-8 relative, as CHECKS.md states (the decimal inputs are not
  // exact in binary; a correct two-pass result there is 0.100000000035).
  const pare::ColumnStats s = stats(numacc(1000000.2, 1000000.1, 1000000.3));
  const double sd = std::sqrt(s.variance);
  INFO("mean " << s.mean << " sd " << sd);
  REQUIRE(s.n == 1001);
  // Mean: certified to 15 digits; 1e-12 relative leaves room for rounding in a 1001-term sum.
  REQUIRE(rel_close(s.mean, 1000000.2, 1e-12));
  REQUIRE(rel_close(sd, 0.1, 1e-8));
}

TEST_CASE("NIST StRD NumAcc4: mean 10000000.2, sd 0.1", "[stats]") {
  // Source: NIST StRD NumAcc4 certified values (CHECKS.md §7): 10000000.2, then 500 x
  // (10000000.1, 10000000.3). Tolerance on sd 1e-7 relative, as CHECKS.md states (a correct
  // two-pass result is 0.100000000559; the naive formula gives 0).
  const pare::ColumnStats s = stats(numacc(10000000.2, 10000000.1, 10000000.3));
  const double sd = std::sqrt(s.variance);
  INFO("mean " << s.mean << " sd " << sd);
  REQUIRE(s.n == 1001);
  REQUIRE(rel_close(s.mean, 10000000.2, 1e-12));  // same reason as NumAcc3
  REQUIRE(rel_close(sd, 0.1, 1e-7));
}

TEST_CASE("Anscombe quartet: mean of y 7.50, variance of x 11", "[stats]") {
  // Source: Anscombe (1973), values in CHECKS.md §7. x1 and x4 are integers (mean 9, sum of
  // squared deviations 110): the variance is exactly 11, in double and in float.
  for (const auto* x : {&kAnscombeX1, &kAnscombeX4}) {
    const pare::ColumnStats s = stats(*x);
    INFO("mean " << s.mean << " variance " << s.variance);
    REQUIRE(s.mean == 9.0);
    REQUIRE(s.variance == 11.0);
    const std::vector<float> xf(x->begin(), x->end());
    REQUIRE(stats(xf).variance == 11.0);
  }
  // Mean of y is published as 7.50 (two decimals): tolerance half a unit of the last digit.
  for (const auto* y : {&kAnscombeY1, &kAnscombeY4}) {
    const pare::ColumnStats s = stats(*y);
    INFO("mean " << s.mean);
    REQUIRE(std::abs(s.mean - 7.50) <= 0.005);
  }
  // Reference library: numpy 1.24.2 (Debian, /usr/bin/python3), y.var(ddof=1) and y.mean().
  // Tolerance 1e-13 relative: same eleven doubles, only the summation order may differ.
  const pare::ColumnStats y1 = stats(kAnscombeY1);
  const pare::ColumnStats y4 = stats(kAnscombeY4);
  INFO("y1 variance " << y1.variance << ", y4 variance " << y4.variance);
  REQUIRE(rel_close(y1.variance, 4.127269090909091, 1e-13));
  REQUIRE(rel_close(y4.variance, 4.123249090909091, 1e-13));
  REQUIRE(rel_close(y1.mean, 7.500909090909093, 1e-13));
  REQUIRE(y1.min == 4.26);
  REQUIRE(y1.max == 10.84);
  REQUIRE(y4.max == 12.50);
}

TEST_CASE("NaN values are skipped and counted as missing", "[stats]") {
  // Anscombe x1 with NaN in front and after each value above 10 (13, 11, 14, 12): the statistics
  // must be those of x1 alone (CHECKS.md §7: mean 9, variance 11, exact for integers).
  std::vector<double> v = {kNaN};
  for (double x : kAnscombeX1) {
    v.push_back(x);
    if (x > 10) v.push_back(kNaN);
  }
  const pare::ColumnStats s = stats(v);
  INFO("n " << s.n << " missing " << s.missing << " mean " << s.mean << " variance " << s.variance);
  REQUIRE(s.n == 11);
  REQUIRE(s.missing == 5);
  REQUIRE(s.mean == 9.0);
  REQUIRE(s.variance == 11.0);
  REQUIRE(s.min == 4.0);
  REQUIRE(s.max == 14.0);
  REQUIRE(s.missing_rate() == 5.0 / 16.0);

  const std::vector<float> vf(v.begin(), v.end());
  REQUIRE(same(pare::column_stats(std::span<const float>(vf)), s));
}

TEST_CASE("n = 0 and n = 1 give NaN variance", "[stats]") {
  // Sample variance (ddof 1) is undefined below two values; the mean of no value is undefined.
  const pare::ColumnStats empty = stats(std::vector<double>{});
  REQUIRE(empty.n == 0);
  REQUIRE(empty.missing == 0);
  REQUIRE(std::isnan(empty.mean));
  REQUIRE(std::isnan(empty.variance));
  REQUIRE(std::isnan(empty.min));
  REQUIRE(std::isnan(empty.max));
  REQUIRE(empty.missing_rate() == 0.0);

  const pare::ColumnStats gaps = stats(std::vector<float>{kNaNf, kNaNf, kNaNf});
  REQUIRE(gaps.n == 0);
  REQUIRE(gaps.missing == 3);
  REQUIRE(std::isnan(gaps.mean));
  REQUIRE(std::isnan(gaps.variance));
  REQUIRE(gaps.missing_rate() == 1.0);

  const pare::ColumnStats one = stats(std::vector<double>{kNaN, 2.5, kNaN});
  REQUIRE(one.n == 1);
  REQUIRE(one.missing == 2);
  REQUIRE(one.mean == 2.5);
  REQUIRE(one.min == 2.5);
  REQUIRE(one.max == 2.5);
  REQUIRE(std::isnan(one.variance));

  // Two equal values: variance exactly 0, not NaN.
  REQUIRE(stats(std::vector<double>{7, 7}).variance == 0.0);
}

TEST_CASE("an infinite value makes the variance NaN, not 0", "[stats]") {
  // Reference library: numpy 1.24.2 (Debian): np.var([1, inf, 2], ddof=1) and
  // np.var([inf, -inf], ddof=1) are nan; np.mean([1, inf, 2]) is inf. (Infinite values reach the
  // statistics when the data is read with --allow-inf.)
  const double inf = std::numeric_limits<double>::infinity();
  const pare::ColumnStats s = stats(std::vector<double>{1, inf, 2});
  INFO("mean " << s.mean << " variance " << s.variance);
  REQUIRE(s.mean == inf);
  REQUIRE(std::isnan(s.variance));
  REQUIRE(s.max == inf);
  REQUIRE(std::isnan(stats(std::vector<float>{std::numeric_limits<float>::infinity(),
                                              -std::numeric_limits<float>::infinity()})
                         .variance));
}

TEST_CASE("compute_column_stats: same results with 1 and 2 threads", "[stats]") {
  // Differential check (STYLE.md: 1 vs N threads must agree): every field bit for bit, and each
  // column equal to column_stats on that column alone.
  constexpr Eigen::Index kRows = 300, kCols = 700;
  std::mt19937_64 rng(7);  // fixed seed
  std::normal_distribution<float> normal(50.0f, 10.0f);
  std::uniform_real_distribution<float> coin(0.0f, 1.0f);
  pare::Matrix m(kRows, kCols);
  for (Eigen::Index j = 0; j < kCols; ++j)
    for (Eigen::Index i = 0; i < kRows; ++i) m(i, j) = coin(rng) < 0.1f ? kNaNf : normal(rng);
  m.col(3).setConstant(kNaNf);  // all missing
  m.col(5).setConstant(kNaNf);
  m(17, 5) = 4.0f;  // one observed value

  const auto one = pare::compute_column_stats(m, 1);
  const auto two = pare::compute_column_stats(m, 2);
  REQUIRE(one.size() == static_cast<std::size_t>(kCols));
  REQUIRE(two.size() == one.size());
  for (Eigen::Index j = 0; j < kCols; ++j) {
    INFO("column " << j);
    const auto k = static_cast<std::size_t>(j);
    REQUIRE(same(one[k], two[k]));
    REQUIRE(same(one[k], pare::column_stats(std::span<const float>(m.col(j).data(), kRows))));
  }
  REQUIRE(one[3].n == 0);
  REQUIRE(one[5].n == 1);
  REQUIRE(std::isnan(one[5].variance));
}

TEST_CASE("missing_per_row counts NaN cells per row", "[stats]") {
  pare::Matrix m(4, 3);
  m << 1, kNaNf, 3,         //
      kNaNf, kNaNf, kNaNf,  //
      7, 8, 9,              //
      kNaNf, 11, 12;
  for (int threads : {1, 2}) {
    INFO("threads " << threads);
    REQUIRE(pare::missing_per_row(m, threads) == std::vector<std::int64_t>{1, 3, 0, 1});
  }

  // A larger matrix against a plain count, with 1 and 2 threads.
  std::mt19937_64 rng(11);  // fixed seed
  std::uniform_real_distribution<float> coin(0.0f, 1.0f);
  pare::Matrix big(257, 513);
  std::vector<std::int64_t> expected(257, 0);
  for (Eigen::Index j = 0; j < big.cols(); ++j)
    for (Eigen::Index i = 0; i < big.rows(); ++i) {
      const bool gap = coin(rng) < 0.3f;
      big(i, j) = gap ? kNaNf : 1.0f;
      expected[static_cast<std::size_t>(i)] += gap;
    }
  REQUIRE(pare::missing_per_row(big, 1) == expected);
  REQUIRE(pare::missing_per_row(big, 2) == expected);
  REQUIRE(pare::missing_per_row(pare::Matrix(0, 5), 2).empty());
}
