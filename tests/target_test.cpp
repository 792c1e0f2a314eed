// Unit tests of the scores against a continuous target (include/pare/ranking.h: average_ranks,
// correlation_p, knn_mutual_information_continuous, score_against_target; src/target_scores.cpp).
// References, each named beside its check: scipy.stats.pearsonr / spearmanr and scikit-learn's own
// kNN estimator (sklearn.feature_selection._mutual_info._compute_mi_cc), run at test time by
// Debian's /usr/bin/python3 (scipy 1.10.1, scikit-learn 1.2.1) on the diabetes data Debian's
// python3-sklearn ships (CHECKS.md §10); the closed form of the MI of a bivariate normal (Cover &
// Thomas, CHECKS §11); and cases worked by hand.
#include "pare/ranking.h"

#include <algorithm>  // std::max, std::min, std::sort
#include <cmath>      // std::abs, std::log, std::sqrt, std::isnan
#include <cstdint>    // std::int64_t, std::uint8_t
#include <cstdio>     // std::snprintf
#include <cstring>    // std::memcmp
#include <limits>     // std::numeric_limits
#include <sstream>    // std::istringstream
#include <string>     // std::string
#include <vector>     // std::vector

#include <catch2/catch.hpp>

#include "internal/random.h"
#include "pare/error.h"
#include "pare/io.h"
#include "pare/matrix.h"
#include "support/public_data.h"
#include "support/python_reference.h"
#include "support/temp_dir.h"

namespace {

using pare::Criterion;
using pare::FeatureScores;
using pare::Matrix;
using pare::test::TempDir;

constexpr double kNan = std::numeric_limits<double>::quiet_NaN();
constexpr double kInf = std::numeric_limits<double>::infinity();

double rel_diff(double actual, double expected) {
  if (actual == expected) return 0.0;
  return std::abs(actual - expected) / std::abs(expected);
}

template <typename T>
bool same_bits(const std::vector<T>& a, const std::vector<T>& b) {
  return a.size() == b.size() && (a.empty() || std::memcmp(a.data(), b.data(), a.size() * sizeof(T)) == 0);
}

std::vector<std::int64_t> all_columns(const Matrix& m) {
  std::vector<std::int64_t> out(static_cast<std::size_t>(m.cols()));
  for (std::size_t j = 0; j < out.size(); ++j) out[j] = static_cast<std::int64_t>(j);
  return out;
}

bool defined(const FeatureScores& s, Criterion c, std::size_t i) { return pare::criterion_defined(s, c, i); }

// The diabetes data (CHECKS.md §10): 442 samples, 10 columns (age, sex, bmi, bp, s1-s6) as
// pare holds them (float32), and the disease-progression target. A missing file skips outside CI
// and fails under CI=true, as read_public does.
struct Diabetes {
  std::vector<std::vector<float>> columns;
  std::vector<double> target;
  bool present = false;
};

std::vector<double> read_numbers(const std::string& path) {
  std::istringstream in(pare::read_file_text(path));  // inflates .gz
  std::vector<double> out;
  std::string field;
  while (in >> field) out.push_back(std::stod(field));
  return out;
}

Diabetes read_diabetes() {
  const std::string dir = "/usr/lib/python3/dist-packages/sklearn/datasets/data/";
  Diabetes d;
  std::vector<double> values;
  try {
    values = read_numbers(dir + "diabetes_data_raw.csv.gz");
    d.target = read_numbers(dir + "diabetes_target.csv.gz");
  } catch (const std::exception&) {
    INFO("the diabetes files of python3-sklearn are missing; CI=true makes that a failure");
    REQUIRE_FALSE(pare::test::in_ci());
    WARN("skipped: diabetes_data_raw.csv.gz not found (install python3-sklearn)");
    return d;
  }
  REQUIRE(d.target.size() == 442);
  REQUIRE(values.size() == 442 * 10);
  d.columns.assign(10, std::vector<float>(442));
  for (std::size_t i = 0; i < 442; ++i)
    for (std::size_t j = 0; j < 10; ++j) d.columns[j][i] = static_cast<float>(values[i * 10 + j]);
  d.present = true;
  return d;
}

// Numbers for the python reference: every value written so that float64 reads it back exactly.
std::string number_text(double v) {
  if (std::isnan(v)) return "nan";
  char buffer[40];
  std::snprintf(buffer, sizeof buffer, "%.17g", v);
  return buffer;
}

// A table, one row per sample, as text for numpy.loadtxt.
std::string table_text(const std::vector<std::vector<double>>& columns) {
  std::string out;
  for (std::size_t i = 0; i < columns.front().size(); ++i) {
    for (std::size_t j = 0; j < columns.size(); ++j) {
      if (j > 0) out += ' ';
      out += number_text(columns[j][i]);
    }
    out += '\n';
  }
  return out;
}

std::vector<double> parse_numbers(const std::string& text) {
  std::istringstream in(text);
  std::vector<double> out;
  std::string field;
  while (in >> field) out.push_back(std::stod(field));
  return out;
}

// The MI estimate computed straight from its definition (the top of src/target_scores.cpp:
// distances |Δ|·(1/sd); k_i, n_x + 1, n_y + 1 the points strictly closer than ε_i, the point
// included, or equal to it when ε_i = 0): every pair, O(n²). Used to check the neighbour search
// on data with every kind of tie.
double direct_ksg(const std::vector<double>& x, const std::vector<double>& y, int k) {
  const std::size_t n = x.size();
  auto inverse_sd = [&](const std::vector<double>& v) {
    double sum = 0;
    for (double a : v) sum += a;
    const double mean = sum / static_cast<double>(n);
    double ss = 0;
    for (double a : v) ss += (a - mean) * (a - mean);
    return 1 / std::sqrt(ss / static_cast<double>(n));
  };
  const double rx = inverse_sd(x), ry = inverse_sd(y);
  auto psi = [](std::int64_t m) {  // ψ(m) = H_{m−1} − γ
    double h = 0;
    for (std::int64_t j = 1; j < m; ++j) h += 1.0 / static_cast<double>(j);
    return h - 0.57721566490153286061;
  };
  double sum_k = 0, sum_x = 0, sum_y = 0;
  for (std::size_t i = 0; i < n; ++i) {
    std::vector<double> d;
    for (std::size_t j = 0; j < n; ++j)
      if (j != i) d.push_back(std::max(std::abs(x[j] - x[i]) * rx, std::abs(y[j] - y[i]) * ry));
    std::sort(d.begin(), d.end());
    const double eps = d[static_cast<std::size_t>(k - 1)];
    std::int64_t ki = 0, nx = 0, ny = 0;
    if (eps > 0) {
      for (std::size_t j = 0; j < n; ++j) {
        const double dx = std::abs(x[j] - x[i]) * rx, dy = std::abs(y[j] - y[i]) * ry;
        nx += dx < eps;
        ny += dy < eps;
        ki += std::max(dx, dy) < eps;
      }
    } else {
      ki = 0;
      for (std::size_t j = 0; j < n; ++j) {
        nx += x[j] == x[i];
        ny += y[j] == y[i];
        ki += x[j] == x[i] && y[j] == y[i];
      }
    }
    sum_k += psi(ki);
    sum_x += psi(nx);
    sum_y += psi(ny);
  }
  const double dn = static_cast<double>(n);
  return std::max(0.0, psi(static_cast<std::int64_t>(n)) + sum_k / dn - sum_x / dn - sum_y / dn);
}

}  // namespace

TEST_CASE("average_ranks gives tied values the mean of their positions", "[target]") {
  // By hand: 3 1 4 1 5 9 2 6 5 3 5 sorted is 1 1 2 3 3 4 5 5 5 6 9, positions 1..11, so the 1s
  // share (1+2)/2, the 3s (4+5)/2, the 5s (7+8+9)/3.
  const std::vector<double> x = {3, 1, 4, 1, 5, 9, 2, 6, 5, 3, 5};
  const std::vector<double> expected = {4.5, 1.5, 6, 1.5, 8, 11, 3, 10, 8, 4.5, 8};
  CHECK(pare::average_ranks(x) == expected);
  // -0 and +0 compare equal and share a rank; a single value has rank 1; none, no ranks.
  CHECK(pare::average_ranks(std::vector<double>{0.0, -0.0, -1.0}) == std::vector<double>{2.5, 2.5, 1});
  CHECK(pare::average_ranks(std::vector<double>{7}) == std::vector<double>{1});
  CHECK(pare::average_ranks(std::vector<double>{}).empty());
}

TEST_CASE("correlation_p: edges and scipy's t test", "[target]") {
  // Edges from the header: 1 for n < 3 or NaN r, 0 for |r| = 1, and 1 for r = 0 (t = 0).
  CHECK(pare::correlation_p(0.9, 2) == 1.0);
  CHECK(pare::correlation_p(kNan, 50) == 1.0);
  CHECK(pare::correlation_p(1.0, 10) == 0.0);
  CHECK(pare::correlation_p(-1.0, 10) == 0.0);
  CHECK(pare::correlation_p(0.0, 10) == 1.0);
  // Symmetric in r.
  CHECK(pare::correlation_p(-0.3, 40) == pare::correlation_p(0.3, 40));
  // n = 4, so ν = 2: the t distribution with 2 df has P(|T| > t) = 1 − t/√(2 + t²) in closed form,
  // and t² = 2r²/(1 − r²) gives p = 1 − |r| exactly (worked by hand).
  for (double r : {0.1, 0.5, 0.9, 0.999})
    CHECK(rel_diff(pare::correlation_p(r, 4), 1 - r) <= 1e-14);

  TempDir dir;
  // scipy.stats.t.sf(|t|, n − 2) * 2 with t = r·√((n−2)/(1−r²)): the two-sided test CHECKS §11
  // names, over |r| from 0.01 to 0.999999 and n from 3 to 100000.
  const std::vector<double> rs = {0.01, 0.1, 0.3, 0.5, 0.8, 0.95, 0.999, 0.999999};
  const std::vector<std::int64_t> ns = {3, 5, 30, 442, 100000};
  const auto out = pare::test::python_output(dir, R"(
import numpy as np
from scipy import stats
for r in [0.01, 0.1, 0.3, 0.5, 0.8, 0.95, 0.999, 0.999999]:
    for n in [3, 5, 30, 442, 100000]:
        t = r * np.sqrt((n - 2) / ((1 - r) * (1 + r)))
        print(repr(float(stats.t.sf(t, n - 2) * 2)))
)");
  if (!out) return;
  const std::vector<double> ref = parse_numbers(*out);
  REQUIRE(ref.size() == rs.size() * ns.size());
  std::size_t at = 0;
  for (double r : rs)
    for (std::int64_t n : ns) {
      const double p = pare::correlation_p(r, n), expected = ref[at++];
      INFO("r = " << r << ", n = " << n << ": pare " << p << ", scipy " << expected);
      if (expected < 1e-300) {
        CHECK(p < 1e-290);  // both underflow
      } else {
        // Both evaluate the same tail to a few ulp (Boost's incomplete beta, scipy's stdtr); the
        // relative condition of p in r grows with n·r, up to ~1e-11 here.
        CHECK(rel_diff(p, expected) <= 1e-10);
      }
    }
}

TEST_CASE("Pearson and Spearman agree with scipy on the diabetes data", "[target]") {
  // scipy.stats.pearsonr and spearmanr (scipy 1.10.1, CHECKS §11) on the ten diabetes columns as
  // pare holds them (float32 values, given to python as float64) against the target, plus bmi with
  // every seventh sample missing, which scipy scores on the observed pairs. The columns have ties
  // (sex has two values, age is in whole years) and so does the target.
  const Diabetes d = read_diabetes();
  if (!d.present) return;
  const std::size_t n = d.target.size();
  Matrix m(static_cast<Eigen::Index>(n), 11);
  std::vector<std::vector<double>> columns;
  for (std::size_t j = 0; j < 11; ++j) {
    std::vector<double> c(n);
    for (std::size_t i = 0; i < n; ++i) {
      float v = d.columns[j < 10 ? j : 2][i];
      if (j == 10 && i % 7 == 3) v = std::numeric_limits<float>::quiet_NaN();
      m(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(j)) = v;
      c[i] = static_cast<double>(v);
    }
    columns.push_back(c);
  }
  columns.push_back(d.target);
  TempDir dir;
  const std::string data = dir.write("data.txt", table_text(columns));
  const auto out = pare::test::python_output(dir, R"(
import sys, numpy as np
from scipy import stats
data = np.loadtxt(sys.argv[1])
t = data[:, -1]
for j in range(data.shape[1] - 1):
    x = data[:, j]
    keep = ~np.isnan(x)
    p = stats.pearsonr(x[keep], t[keep])
    s = stats.spearmanr(x[keep], t[keep])
    print(repr(float(p[0])), repr(float(p[1])), repr(float(s[0])), repr(float(s[1])))
)",
                                              {data});
  if (!out) return;
  const std::vector<double> ref = parse_numbers(*out);
  REQUIRE(ref.size() == 11 * 4);

  pare::ScoreOptions options;
  options.threads = 2;
  const FeatureScores s = pare::score_against_target(m, all_columns(m), d.target, options);
  REQUIRE(s.size() == 11);
  CHECK(s.continuous);
  CHECK(s.chi2.empty());
  CHECK(s.f.empty());
  for (std::size_t j = 0; j < 11; ++j) {
    INFO("column " << j << ": pearson " << s.pearson_r[j] << " p " << s.pearson_p[j] << " vs " << ref[4 * j]
                   << " p " << ref[4 * j + 1] << "; spearman " << s.spearman_rho[j] << " p " << s.spearman_p[j]
                   << " vs " << ref[4 * j + 2] << " p " << ref[4 * j + 3]);
    // 1e-10 relative (issue 17): r and rho are rounded a few times; p is conditioned by ~n·r.
    CHECK(rel_diff(s.pearson_r[j], ref[4 * j]) <= 1e-10);
    CHECK(rel_diff(s.pearson_p[j], ref[4 * j + 1]) <= 1e-10);
    CHECK(rel_diff(s.spearman_rho[j], ref[4 * j + 2]) <= 1e-10);
    CHECK(rel_diff(s.spearman_p[j], ref[4 * j + 3]) <= 1e-10);
    CHECK(defined(s, Criterion::kPearson, j));
    CHECK(defined(s, Criterion::kSpearman, j));
    CHECK(defined(s, Criterion::kMi, j));
    CHECK(s.flags[j] == 0);
  }
  // The gap column: its missing rate, and its variance over the observed values.
  CHECK(s.missing_rate[10] == Approx(63.0 / 442).epsilon(1e-12));  // i % 7 == 3 for 63 of 0..441
  // BH q-values over the 11 features: the adjustment of the p-values (bh_adjust, checked against
  // Benjamini & Hochberg's own example in ranking_test.cpp).
  CHECK(same_bits(s.pearson_q, pare::bh_adjust(s.pearson_p)));
  CHECK(same_bits(s.spearman_q, pare::bh_adjust(s.spearman_p)));
}

TEST_CASE("kNN MI equals scikit-learn's estimator on tie-free data", "[target]") {
  // scikit-learn's own implementation of the Kraskov et al. estimator 1 (_compute_mi_cc, CHECKS
  // §11), called on both variables divided by their standard deviation (n denominator) as
  // mutual_info_regression does, but without its added noise. The data: the ten diabetes columns
  // and the target, each with a small deterministic jitter (numpy's default_rng(2017), uniform
  // ±0.0005 sd) so that no two values and no two distances tie; pare gets the same values.
  const Diabetes d = read_diabetes();
  if (!d.present) return;
  std::vector<std::vector<double>> columns;
  for (const auto& c : d.columns) columns.emplace_back(c.begin(), c.end());
  columns.push_back(d.target);
  TempDir dir;
  const std::string data = dir.write("data.txt", table_text(columns));
  const std::string jittered = dir.file("jittered.txt");
  const auto out = pare::test::python_output(dir, R"(
import sys, numpy as np
from sklearn.feature_selection._mutual_info import _compute_mi_cc
data = np.loadtxt(sys.argv[1])
rng = np.random.default_rng(2017)
data = data + rng.uniform(-0.5, 0.5, data.shape) * 1e-3 * data.std(axis=0)
np.savetxt(sys.argv[2], data, fmt='%.17g')
t = data[:, -1] / np.std(data[:, -1])
for j in range(data.shape[1] - 1):
    x = data[:, j] / np.std(data[:, j])
    print(*[repr(float(_compute_mi_cc(x, t, k))) for k in (1, 3, 5, 10)])
)",
                                              {data, jittered});
  if (!out) return;
  const std::vector<double> ref = parse_numbers(*out);
  REQUIRE(ref.size() == 10 * 4);
  const std::vector<double> values = read_numbers(jittered);
  REQUIRE(values.size() == 442 * 11);
  auto column = [&](std::size_t j) {
    std::vector<double> c(442);
    for (std::size_t i = 0; i < 442; ++i) c[i] = values[i * 11 + j];
    return c;
  };
  const std::vector<double> t = column(10);
  const int ks[] = {1, 3, 5, 10};
  for (std::size_t j = 0; j < 10; ++j) {
    const std::vector<double> x = column(j);
    for (std::size_t a = 0; a < 4; ++a) {
      const double mi = pare::knn_mutual_information_continuous(x, t, ks[a]);
      INFO("column " << j << ", k = " << ks[a] << ": pare " << mi << ", scikit-learn " << ref[4 * j + a]);
      // 1e-9 relative (CHECKS §11): the counts are integers and must agree exactly; what is left
      // is the rounding of the ψ sums.
      CHECK(rel_diff(mi, ref[4 * j + a]) <= 1e-9);
    }
  }
}

TEST_CASE("kNN MI on data on a grid: ties at the k-th distance do not inflate it", "[target]") {
  // Values rounded to a grid put many neighbours at exactly the k-th distance. Counted as estimator
  // 1 writes it (ψ(k) against strict marginal counts) independent normals rounded to 0.05 or 0.2
  // sd score 0.17-0.28 nats and ρ = 0.5 scores 0.33-0.41 (simulation in src/target_scores.cpp);
  // with all three counts in the same open neighbourhood the estimate stays near the closed form
  // −½·ln(1 − ρ²) (Cover & Thomas, CHECKS §11) of the unrounded pair. n = 2,000, k = 3, seeded;
  // 0.06 nats is about 3 standard deviations of the estimate at this n (numpy simulation).
  for (const double rho : {0.0, 0.5}) {
    for (const double step : {0.05, 0.2}) {
      pare::internal::Rng rx(21, 1), ry(21, 2);
      std::vector<double> x(2000), y(2000);
      for (std::size_t i = 0; i < x.size(); ++i) {
        const double z = rx.normal();
        x[i] = std::round(z / step) * step;
        y[i] = std::round((rho * z + std::sqrt(1 - rho * rho) * ry.normal()) / step) * step;
      }
      const double truth = -0.5 * std::log(1 - rho * rho);
      const double mi = pare::knn_mutual_information_continuous(x, y, 3);
      INFO("rho = " << rho << ", grid step " << step << ": estimate " << mi << ", closed form " << truth);
      CHECK(std::abs(mi - truth) <= 0.06);
    }
  }
  // The diabetes columns as pare holds them (float32: age in whole years, bmi to one decimal, sex
  // two values) against the target (whole numbers): finite, not negative, and the function on its
  // own gives score_against_target's bits (the same arithmetic, ranking.h).
  const Diabetes d = read_diabetes();
  if (!d.present) return;
  const std::size_t n = d.target.size();
  Matrix m(static_cast<Eigen::Index>(n), 10);
  for (std::size_t j = 0; j < 10; ++j)
    for (std::size_t i = 0; i < n; ++i) m(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(j)) = d.columns[j][i];
  pare::ScoreOptions options;
  options.threads = 2;
  const FeatureScores s = pare::score_against_target(m, all_columns(m), d.target, options);
  for (std::size_t j = 0; j < 10; ++j) {
    INFO("column " << j << ": " << s.mi[j]);
    CHECK(std::isfinite(s.mi[j]));
    CHECK(s.mi[j] >= 0);
    CHECK(defined(s, Criterion::kMi, j));
    const std::vector<double> x(d.columns[j].begin(), d.columns[j].end());
    CHECK(pare::knn_mutual_information_continuous(x, d.target, 3) == s.mi[j]);
  }
}

TEST_CASE("kNN MI of a bivariate normal is near the closed form", "[target]") {
  // I = −½·ln(1 − ρ²) (Cover & Thomas; CHECKS §11: ρ = 0.5 → 0.143841, ρ = 0.9 → 0.830366 nats).
  // n = 2,000 pairs from internal/random.h's generator, seeded; within 0.03 nats (issue 17), for
  // the function on doubles and for score_against_target on the float32 matrix.
  for (const double rho : {0.0, 0.5, 0.9}) {
    const double truth = -0.5 * std::log(1 - rho * rho);
    if (rho == 0.5) CHECK(truth == Approx(0.143841).margin(5e-7));
    if (rho == 0.9) CHECK(truth == Approx(0.830366).margin(5e-7));
    pare::internal::Rng rx(11, 1), ry(11, 2);  // x and the noise of y from separate streams
    const std::size_t n = 2000;
    std::vector<double> x(n), y(n);
    Matrix m(static_cast<Eigen::Index>(n), 1);
    for (std::size_t i = 0; i < n; ++i) {
      x[i] = static_cast<float>(rx.normal());  // float32 values, so both routes see the same data
      y[i] = rho * x[i] + std::sqrt(1 - rho * rho) * ry.normal();
      m(static_cast<Eigen::Index>(i), 0) = static_cast<float>(x[i]);
    }
    const double mi = pare::knn_mutual_information_continuous(x, y, 3);
    INFO("rho = " << rho << ": estimate " << mi << ", closed form " << truth);
    CHECK(std::abs(mi - truth) <= 0.03);
    pare::ScoreOptions options;
    const FeatureScores s = pare::score_against_target(m, all_columns(m), y, options);
    CHECK(s.mi[0] == mi);
    // The correlation is estimated too: within 4 standard errors (1 − ρ²)/√n of ρ.
    CHECK(std::abs(s.pearson_r[0] - rho) <= 4 * (1 - rho * rho) / std::sqrt(static_cast<double>(n)));
  }
}

TEST_CASE("kNN MI with ε = 0 counts equal points as Gao et al. do: a discrete pair", "[target]") {
  // x and y both take two values; the cells (0,0), (0,1), (1,0), (1,1) hold 40, 20, 20, 40 points
  // (N = 120). Every point has at least k = 3 others equal to it in both variables, so ε = 0 for
  // all: k becomes the cell count, n_x + 1 and n_y + 1 the counts of its x and y value (60 each).
  // Worked by hand with ψ(m) = H_{m−1} − γ (the γ terms cancel):
  //   I = ψ(120) + (80 ψ(40) + 40 ψ(20)) / 120 − 2 ψ(60) = H_119 + (2/3) H_39 + (1/3) H_19 − 2 H_59
  // ≈ 0.0525, near the plug-in MI of the table, (2/3) ln(4/3) + (1/3) ln(2/3) = 0.056633 nats
  // (ψ(m) − ln m ≈ −1/(2m) accounts for the difference).
  std::vector<double> x, y;
  auto add = [&](double a, double b, int count) {
    for (int i = 0; i < count; ++i) {
      x.push_back(a);
      y.push_back(b);
    }
  };
  add(0, 0, 40);
  add(0, 1, 20);
  add(1, 0, 20);
  add(1, 1, 40);
  auto harmonic = [](int m) {
    double h = 0;
    for (int j = m; j >= 1; --j) h += 1.0 / j;
    return h;
  };
  const double exact = harmonic(119) + 2.0 / 3 * harmonic(39) + 1.0 / 3 * harmonic(19) - 2 * harmonic(59);
  const double plug_in = 2.0 / 3 * std::log(4.0 / 3) + 1.0 / 3 * std::log(2.0 / 3);
  const double mi = pare::knn_mutual_information_continuous(x, y, 3);
  INFO("estimate " << mi << ", by hand " << exact << ", plug-in " << plug_in);
  CHECK(std::isfinite(mi));
  CHECK(mi >= 0);
  CHECK(std::abs(mi - exact) <= 1e-12);
  CHECK(std::abs(mi - plug_in) <= 0.005);
  // The rows in another order give the same estimate (a different walk through the same points).
  std::vector<double> xr(x.rbegin(), x.rend()), yr(y.rbegin(), y.rend());
  CHECK(std::abs(pare::knn_mutual_information_continuous(xr, yr, 3) - exact) <= 1e-12);
  // Independent discrete variables (cells 30 each): the plug-in MI is 0, and so is the estimate
  // (ψ(120) + ψ(30) − 2ψ(60) < 0 is clipped).
  x.clear();
  y.clear();
  add(0, 0, 30);
  add(0, 1, 30);
  add(1, 0, 30);
  add(1, 1, 30);
  CHECK(pare::knn_mutual_information_continuous(x, y, 3) == 0.0);
}

TEST_CASE("kNN MI: the neighbour search equals the definition on tied and untied data", "[target]") {
  // Against the estimator computed pair by pair from its definition (direct_ksg above): values on
  // coarse and fine grids (ties in x, in y, in both, at distance 0 and above), mixtures of a
  // continuous part and repeated atoms, and continuous data, for k = 1, 3, 4 and 9 (4 and 9 on
  // both sides of the unrolled sizes). Same counts, so equal to rounding of the sums.
  pare::internal::Rng rng(5);
  for (int trial = 0; trial < 40; ++trial) {
    const std::size_t n = 20 + static_cast<std::size_t>(rng.below(150));
    const int kind = trial % 5;
    std::vector<double> x(n), y(n);
    for (std::size_t i = 0; i < n; ++i) {
      const double z = rng.normal();
      const double w = 0.6 * z + 0.8 * rng.normal();
      switch (kind) {
        case 0:  // both on a coarse grid: many points equal in both
          x[i] = std::round(z * 2);
          y[i] = std::round(w * 2);
          break;
        case 1:  // x coarse, y continuous
          x[i] = std::round(z);
          y[i] = w;
          break;
        case 2:  // x continuous, y on a fine grid (ties at distances above 0)
          x[i] = z;
          y[i] = std::round(w * 20) / 20;
          break;
        case 3:  // atoms: a third of the points at (0, 0), the rest continuous
          x[i] = rng.uniform() < 0.33 ? 0.0 : z;
          y[i] = x[i] == 0.0 ? 0.0 : w;
          break;
        default:
          x[i] = z;
          y[i] = w;
      }
    }
    for (const int k : {1, 3, 4, 9}) {
      if (static_cast<std::size_t>(k) >= n) continue;
      bool constant_x = true, constant_y = true;
      for (std::size_t i = 1; i < n; ++i) {
        constant_x = constant_x && x[i] == x[0];
        constant_y = constant_y && y[i] == y[0];
      }
      if (constant_x || constant_y) continue;
      const double fast = pare::knn_mutual_information_continuous(x, y, k);
      const double direct = direct_ksg(x, y, k);
      INFO("trial " << trial << " (kind " << kind << "), n = " << n << ", k = " << k << ": " << fast << " vs "
                    << direct);
      CHECK(std::abs(fast - direct) <= 1e-12);
    }
  }
}

TEST_CASE("score_against_target does not depend on the thread count", "[target]") {
  // Bitwise identical vectors for 1 and 2 threads, on columns of every kind: continuous, tied,
  // with gaps, constant, all missing, with an infinite value.
  pare::internal::Rng rng(3);
  const Eigen::Index n = 300, p = 150;
  std::vector<double> target(static_cast<std::size_t>(n));
  for (auto& t : target) t = std::round(rng.normal() * 4) / 4;  // a target with ties
  Matrix m(n, p);
  for (Eigen::Index j = 0; j < p; ++j)
    for (Eigen::Index i = 0; i < n; ++i) {
      double v = rng.normal() + (j % 10 == 0 ? target[static_cast<std::size_t>(i)] : 0.0);
      if (j % 3 == 1) v = std::round(v * 2);
      if (j % 4 == 2 && rng.uniform() < 0.1) v = kNan;
      m(i, j) = static_cast<float>(v);
    }
  m.col(5).setConstant(2.5f);
  m.col(7).setConstant(std::numeric_limits<float>::quiet_NaN());
  m(3, 11) = std::numeric_limits<float>::infinity();
  pare::ScoreOptions one, two;
  one.threads = 1;
  two.threads = 2;
  const auto features = all_columns(m);
  const FeatureScores a = pare::score_against_target(m, features, target, one);
  const FeatureScores b = pare::score_against_target(m, features, target, two);
  CHECK(same_bits(a.mi, b.mi));
  CHECK(same_bits(a.pearson_r, b.pearson_r));
  CHECK(same_bits(a.pearson_p, b.pearson_p));
  CHECK(same_bits(a.pearson_q, b.pearson_q));
  CHECK(same_bits(a.spearman_rho, b.spearman_rho));
  CHECK(same_bits(a.spearman_p, b.spearman_p));
  CHECK(same_bits(a.spearman_q, b.spearman_q));
  CHECK(same_bits(a.variance, b.variance));
  CHECK(same_bits(a.missing_rate, b.missing_rate));
  CHECK(a.flags == b.flags);
  CHECK(a.defined == b.defined);
  // Nothing is NaN (undefined scores are 0 with p 1), except the variance of the infinite column.
  for (std::size_t j = 0; j < a.size(); ++j) {
    INFO("feature " << j);
    CHECK_FALSE(std::isnan(a.mi[j]));
    CHECK_FALSE(std::isnan(a.pearson_r[j]));
    CHECK_FALSE(std::isnan(a.pearson_p[j]));
    CHECK_FALSE(std::isnan(a.spearman_rho[j]));
    CHECK_FALSE(std::isnan(a.spearman_p[j]));
  }
  // The signal columns (every tenth) rank first by |rho|.
  for (std::size_t j = 0; j < a.size(); j += 10) CHECK(std::abs(a.spearman_rho[j]) > 0.5);
}

TEST_CASE("score_against_target: a feature with gaps is scored on its observed rows", "[target]") {
  // The same numbers as scoring only the rows it observes (target restricted to them): the
  // correlation, the ranks and the MI are all taken on the observed pairs.
  pare::internal::Rng rng(8);
  const Eigen::Index n = 200;
  std::vector<double> target(static_cast<std::size_t>(n));
  for (auto& t : target) t = std::round(rng.normal() * 10) / 10;
  Matrix m(n, 2);
  for (Eigen::Index i = 0; i < n; ++i) {
    m(i, 0) = static_cast<float>(rng.normal() + target[static_cast<std::size_t>(i)]);
    m(i, 1) = i % 5 == 0 ? std::numeric_limits<float>::quiet_NaN() : m(i, 0);
  }
  std::vector<float> observed;
  std::vector<double> observed_target;
  for (Eigen::Index i = 0; i < n; ++i)
    if (i % 5 != 0) {
      observed.push_back(m(i, 0));
      observed_target.push_back(target[static_cast<std::size_t>(i)]);
    }
  Matrix sub(static_cast<Eigen::Index>(observed.size()), 1);
  for (std::size_t i = 0; i < observed.size(); ++i) sub(static_cast<Eigen::Index>(i), 0) = observed[i];
  pare::ScoreOptions options;
  const FeatureScores with_gaps = pare::score_against_target(m, std::vector<std::int64_t>{1}, target, options);
  const FeatureScores compact = pare::score_against_target(sub, std::vector<std::int64_t>{0}, observed_target, options);
  CHECK(with_gaps.pearson_r[0] == compact.pearson_r[0]);
  CHECK(with_gaps.pearson_p[0] == compact.pearson_p[0]);
  CHECK(with_gaps.spearman_rho[0] == compact.spearman_rho[0]);
  CHECK(with_gaps.spearman_p[0] == compact.spearman_p[0]);
  CHECK(with_gaps.mi[0] == compact.mi[0]);
  CHECK(with_gaps.missing_rate[0] == Approx(0.2));
  CHECK(compact.missing_rate[0] == 0.0);
}

TEST_CASE("score_against_target: constant, too few pairs, infinite values", "[target]") {
  // The header's rules: pearson and spearman need 3 observed pairs and neither side constant on
  // them (pearson also finite values); mi more than k pairs, finite, neither constant; undefined
  // scores are 0 with p 1; kScoreConstant for a constant or empty feature, kScoreFewValues for
  // fewer than 3 pairs.
  const float nan = std::numeric_limits<float>::quiet_NaN();
  const float inf = std::numeric_limits<float>::infinity();
  const std::vector<double> target = {1, 2, 3, 4, 5, 6};
  Matrix m(6, 7);
  m.col(0) << 1, 3, 2, 5, 4, 6;              // ordinary
  m.col(1) << 2, 2, 2, 2, 2, 2;              // constant
  m.col(2) << nan, nan, nan, nan, nan, nan;  // empty
  m.col(3) << 1, nan, nan, 4, nan, nan;      // two pairs
  m.col(4) << 1, 2, inf, 3, 5, 4;            // an infinite value
  m.col(5) << 1, 2, nan, 4, 3, nan;          // four pairs: mi needs more than k = 3, it has 4
  m.col(6) << 7, 8, 9, nan, nan, nan;        // three pairs whose target is 1 2 3: fine
  pare::ScoreOptions options;
  const FeatureScores s = pare::score_against_target(m, all_columns(m), target, options);
  auto bits = [&](std::size_t j) {
    std::uint8_t b = 0;
    for (Criterion c : {Criterion::kPearson, Criterion::kSpearman, Criterion::kMi, Criterion::kVariance})
      if (defined(s, c, j)) b |= static_cast<std::uint8_t>(1u << static_cast<unsigned>(c));
    return b;
  };
  const auto bit = [](Criterion c) { return static_cast<std::uint8_t>(1u << static_cast<unsigned>(c)); };
  const std::uint8_t all = bit(Criterion::kPearson) | bit(Criterion::kSpearman) | bit(Criterion::kMi) |
                           bit(Criterion::kVariance);
  CHECK(bits(0) == all);
  CHECK(s.flags[0] == 0);
  CHECK(s.spearman_rho[0] == Approx(31.0 / 35));  // Σd² = 4 with no ties: 1 − 6·4/(6·35), by hand

  CHECK(bits(1) == bit(Criterion::kVariance));
  CHECK(s.flags[1] == pare::kScoreConstant);
  CHECK(bits(2) == bit(Criterion::kVariance));
  CHECK(s.flags[2] == (pare::kScoreConstant | pare::kScoreFewValues));
  CHECK(bits(3) == bit(Criterion::kVariance));
  CHECK(s.flags[3] == pare::kScoreFewValues);
  CHECK(bits(4) == (bit(Criterion::kSpearman) | bit(Criterion::kVariance)));
  CHECK(s.flags[4] == 0);
  CHECK(s.spearman_rho[4] == Approx(0.6));  // ranks 1 2 6 3 5 4 against 1..6: Σd² = 14, by hand
  CHECK(bits(5) == all);
  CHECK(bits(6) == (bit(Criterion::kPearson) | bit(Criterion::kSpearman) | bit(Criterion::kVariance)));
  CHECK(s.pearson_r[6] == 1.0);
  CHECK(s.pearson_p[6] == 0.0);
  for (std::size_t j : {1, 2, 3}) {
    INFO("feature " << j);
    CHECK(s.pearson_r[j] == 0.0);
    CHECK(s.pearson_p[j] == 1.0);
    CHECK(s.spearman_rho[j] == 0.0);
    CHECK(s.spearman_p[j] == 1.0);
    CHECK(s.mi[j] == 0.0);
  }
  CHECK(s.pearson_p[4] == 1.0);
  CHECK(s.mi[4] == 0.0);
  // A target constant on a feature's observed rows leaves its correlations and MI undefined.
  const std::vector<double> flat = {5, 5, 5, 1, 2, 3};
  const FeatureScores f = pare::score_against_target(m, std::vector<std::int64_t>{6}, flat, options);
  CHECK_FALSE(defined(f, Criterion::kPearson, 0));
  CHECK_FALSE(defined(f, Criterion::kSpearman, 0));
  CHECK_FALSE(defined(f, Criterion::kMi, 0));
  CHECK(f.flags[0] == 0);
  // The kNN MI on its own: 0 with not more than k points or a constant variable.
  CHECK(pare::knn_mutual_information_continuous(std::vector<double>{1, 2, 3}, std::vector<double>{3, 1, 2}, 3) == 0.0);
  CHECK(pare::knn_mutual_information_continuous(std::vector<double>{1, 1, 1, 1, 1},
                                                std::vector<double>{1, 2, 3, 4, 5}, 1) == 0.0);
  // Bad arguments: k < 1 is a usage error; a non-finite target an internal one.
  CHECK_THROWS_AS(pare::knn_mutual_information_continuous(std::vector<double>{1, 2}, std::vector<double>{1, 2}, 0),
                  pare::Error);
  pare::ScoreOptions zero;
  zero.neighbors = 0;
  CHECK_THROWS_AS(pare::score_against_target(m, all_columns(m), target, zero), pare::Error);
  const std::vector<double> bad = {1, 2, kNan, 4, 5, 6};
  CHECK_THROWS_AS(pare::score_against_target(m, all_columns(m), bad, options), pare::Error);
  const std::vector<double> bad_inf = {1, 2, kInf, 4, 5, 6};
  CHECK_THROWS_AS(pare::score_against_target(m, all_columns(m), bad_inf, options), pare::Error);
}
