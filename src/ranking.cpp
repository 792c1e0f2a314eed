#include "pare/ranking.h"

#include <boost/math/distributions/chi_squared.hpp>
#include <boost/math/distributions/fisher_f.hpp>
#include <boost/math/special_functions/digamma.hpp>

#include <algorithm>  // std::sort, std::stable_sort, std::partition_point
#include <cmath>      // std::log, std::isnan, std::isinf, std::isfinite
#include <exception>  // std::exception_ptr, std::current_exception, std::rethrow_exception
#include <limits>     // std::numeric_limits
#include <numeric>    // std::iota

#include "internal/format.h"
#include "internal/omp.h"
#include "internal/order_keys.h"
#include "internal/columns.h"
#include "pare/error.h"
#include "pare/progress.h"

namespace pare {

namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();

// Boost.Math evaluates double functions in long double by default; double is accurate to a few ulp
// here and several times faster (the tails are evaluated for every feature).
using DoublePolicy = boost::math::policies::policy<boost::math::policies::promote_double<false>>;

using internal::order_key;
using internal::sort_keys;

}  // namespace

Criterion parse_criterion(const std::string& name) {
  if (name == "mi") return Criterion::kMi;
  if (name == "chi2") return Criterion::kChi2;
  if (name == "chi2-counts") return Criterion::kChi2Counts;
  if (name == "f") return Criterion::kF;
  if (name == "variance") return Criterion::kVariance;
  if (name == "pearson") return Criterion::kPearson;
  if (name == "spearman") return Criterion::kSpearman;
  throw_usage_error("`rank_by` " + name + " is not one of mi, chi2, chi2-counts, f, variance (classes), "
                    "pearson, spearman, mi, variance (a continuous target)");
}

const char* criterion_name(Criterion c) {
  switch (c) {
    case Criterion::kMi: return "mi";
    case Criterion::kChi2: return "chi2";
    case Criterion::kChi2Counts: return "chi2-counts";
    case Criterion::kF: return "f";
    case Criterion::kPearson: return "pearson";
    case Criterion::kSpearman: return "spearman";
    case Criterion::kVariance: break;
  }
  return "variance";
}

std::vector<int> equal_frequency_bins(std::span<const double> values, int bins) {
  const std::size_t n = values.size();
  std::vector<std::size_t> order(n);
  std::iota(order.begin(), order.end(), std::size_t{0});
  std::stable_sort(order.begin(), order.end(),
                   [&](std::size_t a, std::size_t b) { return values[a] < values[b]; });
  std::vector<int> bin(n);
  std::size_t start = 0;  // L(x): values strictly less than the current run
  for (std::size_t i = 0; i < n; ++i) {
    if (i > 0 && values[order[i]] != values[order[i - 1]]) start = i;
    bin[order[i]] = static_cast<int>(static_cast<std::uint64_t>(bins) * start / n);
  }
  return bin;
}

namespace {

// Row sums, column sums and total of a rows x cols table given row-major.
struct Margins {
  std::vector<double> row_sum, col_sum;
  double total = 0;
};

Margins margins_of(std::span<const double> table, int rows, int cols) {
  Margins m;
  m.row_sum.assign(static_cast<std::size_t>(rows), 0.0);
  m.col_sum.assign(static_cast<std::size_t>(cols), 0.0);
  for (int r = 0; r < rows; ++r)
    for (int c = 0; c < cols; ++c) {
      const double v = table[static_cast<std::size_t>(r * cols + c)];
      m.row_sum[static_cast<std::size_t>(r)] += v;
      m.col_sum[static_cast<std::size_t>(c)] += v;
      m.total += v;
    }
  return m;
}

}  // namespace

double mutual_information(std::span<const double> table, int rows, int cols) {
  const auto [row_sum, col_sum, total] = margins_of(table, rows, cols);
  if (total <= 0) return 0;
  // MI = (sum v ln v - sum r ln r - sum c ln c + N ln N) / N over the cells v, row totals r and
  // column totals c. Each sum runs over its values in ascending order, so two tables with the same
  // multisets of cells and totals (equal MI in exact arithmetic) get the same bits, and the
  // ranking breaks such ties by input order rather than by rounding.
  // The four sums are of size N ln N and MI is their small difference, so they are formed in
  // long double (64-bit mantissa on x86): the cancellation then costs about 1e-19 N ln N instead
  // of 1e-16, which keeps tiny MIs accurate to well under 1e-12 relative.
  auto sum_x_log_x = [](std::vector<double> values) {
    std::sort(values.begin(), values.end());
    long double sum = 0;
    for (const double v : values)
      if (v > 0) sum += static_cast<long double>(v) * std::log(static_cast<long double>(v));
    return sum;
  };
  const long double cells = sum_x_log_x(std::vector<double>(table.begin(), table.begin() + rows * cols));
  const auto n = static_cast<long double>(total);
  const long double mi = (cells - sum_x_log_x(row_sum) - sum_x_log_x(col_sum) + n * std::log(n)) / n;
  return std::max(0.0, static_cast<double>(mi));
}

double pearson_chi2(std::span<const double> table, int rows, int cols, int& df) {
  const auto [row_sum, col_sum, total] = margins_of(table, rows, cols);
  int used_rows = 0, used_cols = 0;
  for (double v : row_sum) used_rows += v > 0;
  for (double v : col_sum) used_cols += v > 0;
  df = std::max(0, (used_rows - 1) * (used_cols - 1));
  if (df == 0) return 0;
  // The terms are summed in ascending order, so tables that are row and column permutations of
  // each other (equal in exact arithmetic) get the same bits.
  std::vector<double> terms;
  terms.reserve(static_cast<std::size_t>(rows * cols));
  for (int r = 0; r < rows; ++r) {
    if (row_sum[static_cast<std::size_t>(r)] <= 0) continue;
    for (int c = 0; c < cols; ++c) {
      if (col_sum[static_cast<std::size_t>(c)] <= 0) continue;
      const double expected = row_sum[static_cast<std::size_t>(r)] * col_sum[static_cast<std::size_t>(c)] / total;
      const double d = table[static_cast<std::size_t>(r * cols + c)] - expected;
      terms.push_back(d * d / expected);
    }
  }
  std::sort(terms.begin(), terms.end());
  double chi2 = 0;
  for (const double t : terms) chi2 += t;
  return chi2;
}

double chi2_upper_tail(double statistic, double df) {
  if (!(df > 0) || !(statistic > 0)) return 1.0;
  if (std::isinf(statistic)) return 0.0;
  return boost::math::cdf(boost::math::complement(boost::math::chi_squared_distribution<double, DoublePolicy>(df), statistic));
}

double f_upper_tail(double statistic, double df1, double df2) {
  if (!(df1 > 0) || !(df2 > 0) || !(statistic > 0)) return 1.0;
  if (std::isinf(statistic)) return 0.0;
  return boost::math::cdf(
      boost::math::complement(boost::math::fisher_f_distribution<double, DoublePolicy>(df1, df2), statistic));
}

namespace {

// psi(m) for the integers 0 < m <= n by the recurrence psi(m + 1) = psi(m) + 1/m, psi(1) = -Euler's
// gamma: a per-thread table grown on demand (the kNN estimator needs psi of counts only), returned
// whole so a loop over points indexes it directly.
const double* psi_table(std::int64_t n) {
  thread_local std::vector<double> table{0.0, -0.57721566490153286060651209008240243};
  while (static_cast<std::int64_t>(table.size()) <= n) {
    const auto last = static_cast<double>(table.size() - 1);
    table.push_back(table.back() + 1.0 / last);
  }
  return table.data();
}

// Buffers of the kNN estimator, reused from feature to feature (one set per thread), so nothing is
// allocated per feature once they have grown.
struct KnnScratch {
  std::vector<std::int64_t> count, offset, fill;
  std::vector<double> members, all;
};

// The kNN estimator on values sorted ascending, `y[i]` the class of `x[i]`.
//
// Ross (2014, PLoS ONE 9(2): e87357) for a continuous x against a discrete y, as CHECKS.md §5
// states it: MI = psi(N) + <psi(k_i)> - <psi(N_c(i))> - <psi(m_i)>, clipped at 0, where rho_i is
// the distance from x_i to its k-th nearest neighbour in the joint space (x, y) with the max-norm,
// i.e. in its own class (a point of another class is infinitely far), k_i = min(k, N_c - 1), and
// m_i counts the points of any class strictly closer than rho_i, x_i itself included.
//
// Ties. Gao, Kannan, Oh & Viswanath, "Estimating Mutual Information for Discrete-Continuous
// Mixtures", NeurIPS 2017, keep this form but, where the k-th neighbour distance is 0, replace k by
// the number of points in the zero-radius joint ball and count the marginal balls with that same
// radius; in the authors' published Python code for the paper the point itself is counted in all
// three counts. (The paper's Algorithm 1 is recalled from memory only.)
// Here, for every point, the ball is B_i = {x : |x - x_i| < rho_i} when rho_i > 0 and {x_i} when
// rho_i = 0, and
//   k_i = points of class(i) in B_i,   m_i = points of any class in B_i,   both with x_i itself.
// - No ties at distance rho_i > 0: the k - 1 nearer same-class neighbours and x_i are strictly
//   inside, so k_i = k and m_i is Ross's: tie-free data give Ross's value exactly (CHECKS §5).
// - rho_i = 0: Gao et al.'s rule. For a purely discrete x (every value held by more than k points
//   of each class that holds it) the estimate is psi(N) + (1/N) sum_{x,c} n_xc [psi(n_xc) -
//   psi(n_c) - psi(n_x)]: the plug-in MI sum_{x,c} (n_xc/N) ln(N n_xc / (n_c n_x)) with psi(n) in
//   place of ln n (psi(n) - ln n -> 0), like the estimator the paper proves consistent.
// - Ties at a distance rho_i > 0 (values on a grid: a fixed number of decimals, integer counts):
//   Ross and Gao et al. (whose model has ties only at distance 0) keep k_i = k while the
//   neighbours at exactly rho_i are left out of m_i, so m_i can fall below k and a feature
//   unrelated to the class scores high (54 planted near-constant demo features in the kNN top 100).
//   Counting k_i in the same open ball as m_i keeps the ratio k_i / m_i an estimate of the class
//   share near x_i. With ties at distance 0 only, this is Gao et al.'s estimator (with psi(N) where
//   their code has ln N); without ties, Ross's.
// Cost: O(k + log n) per point (an outward walk, then binary searches in sorted arrays).
double knn_mi_sorted(std::span<const double> x, std::span<const int> y, int classes, int k,
                     KnnScratch& s) {
  const auto nc = static_cast<std::size_t>(classes);
  s.count.assign(nc, 0);
  for (int c : y) ++s.count[static_cast<std::size_t>(c)];
  // Points alone in their class carry no neighbour information and are left out (N shrinks). The
  // others are grouped by class (each group stays sorted) and all together in `all` (sorted).
  s.offset.assign(nc + 1, 0);
  for (std::size_t c = 0; c < nc; ++c)
    s.offset[c + 1] = s.offset[c] + (s.count[c] >= 2 ? s.count[c] : 0);
  const std::int64_t n = s.offset[nc];
  if (n == 0) return 0;
  s.members.resize(static_cast<std::size_t>(n));
  s.all.resize(static_cast<std::size_t>(n));
  s.fill.assign(s.offset.begin(), s.offset.end() - 1);
  std::size_t next = 0;
  for (std::size_t i = 0; i < x.size(); ++i) {
    const auto c = static_cast<std::size_t>(y[i]);
    if (s.count[c] < 2) continue;
    s.members[static_cast<std::size_t>(s.fill[c]++)] = x[i];
    s.all[next++] = x[i];
  }
  const double* all_begin = s.all.data();
  const double* all_end = all_begin + n;
  const double* psi = psi_table(n);  // every count below is at most n

  double sum_psi_k = 0, sum_psi_class = 0, sum_psi_m = 0;
  for (std::size_t c = 0; c < nc; ++c) {
    const std::int64_t size = s.count[c];
    if (size < 2) continue;
    const double* members = s.members.data() + s.offset[c];
    const std::int64_t kc = std::min<std::int64_t>(k, size - 1);
    sum_psi_class += static_cast<double>(size) * psi[size];
    for (std::int64_t pos = 0; pos < size; ++pos) {
      const double xi = members[pos];
      // Walk outwards from pos to the kc-th nearest other member: the distances met never
      // decrease, so when the walk stops at distance d every member closer than d has been passed.
      // `inside` counts the members passed strictly closer than d, `at_d` those at d.
      std::int64_t left = pos - 1, right = pos + 1, inside = 0, at_d = 0;
      double d = 0;
      for (std::int64_t step = 0; step < kc; ++step) {
        const double dl = left >= 0 ? xi - members[left] : kInf;
        const double dr = right < size ? members[right] - xi : kInf;
        const double next_d = std::min(dl, dr);
        if (dl <= dr)
          --left;
        else
          ++right;
        if (next_d > d) {
          inside += at_d;
          at_d = 1;
          d = next_d;
        } else {
          ++at_d;
        }
      }
      std::int64_t ki, m;
      if (d > 0) {
        // The open ball |x - x_i| < d: the distances are formed as in the walk (xi - v, v - xi).
        ki = 1 + inside;
        const double* lo = std::partition_point(
            all_begin, all_end, [&](double v) { return v < xi && !(xi - v < d); });
        const double* hi =
            std::partition_point(lo, all_end, [&](double v) { return v <= xi || v - xi < d; });
        m = hi - lo;
      } else {
        // The zero-radius ball: the points equal to x_i, of its class and of any class.
        const auto same = std::equal_range(members, members + size, xi);
        ki = same.second - same.first;
        const auto any = std::equal_range(all_begin, all_end, xi);
        m = any.second - any.first;
      }
      sum_psi_k += psi[ki];
      sum_psi_m += psi[m];
    }
  }
  const double dn = static_cast<double>(n);
  const double mi = psi[n] + (sum_psi_k - sum_psi_class - sum_psi_m) / dn;
  return std::max(0.0, mi);
}

}  // namespace

double knn_mutual_information(std::span<const double> x, std::span<const int> y, int classes, int k) {
  std::vector<std::size_t> order(x.size());
  std::iota(order.begin(), order.end(), std::size_t{0});
  std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) { return x[a] < x[b]; });
  std::vector<double> xs(x.size());
  std::vector<int> ys(x.size());
  for (std::size_t i = 0; i < order.size(); ++i) {
    xs[i] = x[order[i]];
    ys[i] = y[order[i]];
  }
  KnnScratch scratch;
  return knn_mi_sorted(xs, ys, classes, k, scratch);
}

std::vector<double> bh_adjust(std::span<const double> p) {
  const std::size_t m = p.size();
  std::vector<std::size_t> order(m);
  std::iota(order.begin(), order.end(), std::size_t{0});
  std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) { return p[a] < p[b]; });
  std::vector<double> q(m);
  double running = 1.0;
  for (std::size_t r = m; r-- > 0;) {
    const double value = p[order[r]] * static_cast<double>(m) / static_cast<double>(r + 1);
    running = std::min(running, value);
    q[order[r]] = running;
  }
  return q;
}

std::vector<double> bonferroni_adjust(std::span<const double> p) {
  std::vector<double> out(p.size());
  for (std::size_t i = 0; i < p.size(); ++i) out[i] = std::min(1.0, p[i] * static_cast<double>(p.size()));
  return out;
}

namespace {

// Per-thread scratch space for one feature at a time.
struct Scratch {
  std::vector<std::uint64_t> keys, buffer;
  std::vector<double> table;
  std::vector<double> values;
  std::vector<int> labels;
  std::vector<double> class_sum, class_mean;
  std::vector<std::int64_t> class_count;
  KnnScratch knn;
};

struct Result {
  double mi = 0, chi2 = 0, chi2_p = 1, f = 0, f_p = 1, counts = 0, counts_p = 1, variance = 0, missing_rate = 0;
  int chi2_df = 0;
  std::uint8_t flags = 0;
  std::uint8_t defined = 0;  // bits 1 << Criterion (FeatureScores::defined)
  bool negative = false;
};

constexpr std::uint8_t defined_bit(Criterion c) {
  return static_cast<std::uint8_t>(1u << static_cast<unsigned>(c));
}

Result score_one(const float* column, std::int64_t n_rows, const std::vector<int>& codes, int k,
                 const ScoreOptions& options, Scratch& s, const ColumnStats* known) {
  Result r;
  const ColumnStats stats = known ? *known : column_stats(std::span<const float>(column, static_cast<std::size_t>(n_rows)));
  r.variance = stats.n >= 2 ? stats.variance : 0.0;
  r.missing_rate = stats.missing_rate();
  const auto ku = static_cast<std::size_t>(k);
  s.class_count.assign(ku, 0);
  s.class_sum.assign(ku, 0.0);
  s.keys.clear();
  for (std::int64_t i = 0; i < n_rows; ++i) {
    const float v = column[i];
    if (std::isnan(v)) continue;
    const int c = codes[static_cast<std::size_t>(i)];
    ++s.class_count[static_cast<std::size_t>(c)];
    s.class_sum[static_cast<std::size_t>(c)] += static_cast<double>(v);
    s.keys.push_back(static_cast<std::uint64_t>(order_key(v)) << 32 | static_cast<std::uint32_t>(i));
  }
  r.negative = stats.n > 0 && stats.min < 0;
  r.defined = defined_bit(Criterion::kVariance);
  // Classes of any size are scored (SPEC §9): MI and chi-square need only two distinct values; F
  // is taken over the classes with an observed value and needs two of them and more observed
  // values than classes (df2 = n - k_obs > 0).
  std::int64_t classes_observed = 0, classes_with_two = 0;
  for (auto count : s.class_count) {
    classes_observed += count >= 1;
    classes_with_two += count >= 2;
  }
  const bool every_class_observed = classes_observed == k;
  const auto n = static_cast<std::int64_t>(s.keys.size());  // observed values
  const bool f_defined = classes_observed >= 2 && n > classes_observed;
  if (!f_defined) r.flags |= kScoreFewValues;
  if (stats.n == 0 || stats.min == stats.max) r.flags |= kScoreConstant;
  // An infinite value (--allow-inf) leaves class means and distances undefined: F, the counts
  // chi-square and the kNN MI stay 0 with p 1; the rank-based binned MI and chi-square remain.
  const bool finite = stats.n == 0 || (std::isfinite(stats.min) && std::isfinite(stats.max));

  const double dn = static_cast<double>(n);
  const double df1 = static_cast<double>(k - 1);

  // The counts chi-square uses only the per-class sums, so it is defined as soon as every class
  // has an observed value (a class of one sample is common for count data; CHECKS.md §6 has such
  // a case). A constant feature scores 0 exactly.
  if (options.counts_chi2 && !r.negative && finite && every_class_observed &&
      !(r.flags & kScoreConstant)) {
    // observed = per-class sums, expected = class share x total (CHECKS.md §6).
    double total = 0;
    for (double v : s.class_sum) total += v;
    if (total > 0) {
      for (std::size_t c = 0; c < ku; ++c) {
        const double expected = static_cast<double>(s.class_count[c]) / dn * total;
        const double d = s.class_sum[c] - expected;
        r.counts += d * d / expected;
      }
      r.counts_p = chi2_upper_tail(r.counts, df1);
      r.defined |= defined_bit(Criterion::kChi2Counts);
    }
  }
  if (r.flags & kScoreConstant) return r;  // defined result: the other scores 0, p-values 1

  // Equal-frequency bins (SPEC §4) and the bin x class table. With bins >= n, floor(B L / n) is
  // strictly increasing in L, so bin L gives the same partition (the same table up to empty rows,
  // hence the same MI and chi-square) with n rows instead of B: a large --bins cannot allocate a
  // huge table.
  sort_keys(s.keys, s.buffer);
  const bool by_rank = static_cast<std::int64_t>(options.bins) >= n;
  const int bins = by_rank ? static_cast<int>(n) : options.bins;
  s.table.assign(static_cast<std::size_t>(bins) * ku, 0.0);
  std::int64_t run_start = 0;
  for (std::int64_t i = 0; i < n; ++i) {
    const std::uint64_t key = s.keys[static_cast<std::size_t>(i)];
    if (i > 0 && (key >> 32) != (s.keys[static_cast<std::size_t>(i - 1)] >> 32)) run_start = i;
    const auto b = by_rank ? static_cast<std::size_t>(run_start)
                           : static_cast<std::size_t>(static_cast<std::uint64_t>(bins) *
                                                      static_cast<std::uint64_t>(run_start) /
                                                      static_cast<std::uint64_t>(n));
    const int c = codes[key & 0xFFFFFFFFu];
    s.table[b * ku + static_cast<std::size_t>(c)] += 1.0;
  }
  if (options.mi == MiEstimator::kBinned) {
    r.mi = mutual_information(s.table, bins, k);
  } else if (finite) {
    // The keys are sorted by value already: the estimator takes them in that order.
    s.values.clear();
    s.labels.clear();
    for (const std::uint64_t key : s.keys) {
      const auto row = static_cast<std::size_t>(key & 0xFFFFFFFFu);
      s.values.push_back(static_cast<double>(column[row]));
      s.labels.push_back(codes[row]);
    }
    r.mi = knn_mi_sorted(s.values, s.labels, k, options.neighbors, s.knn);
  }
  // pearson_chi2 drops empty bins and classes: df = (r - 1)(c - 1) of the non-empty table, and a
  // table with one non-empty row or column has df 0, chi-square 0, p 1 (and MI 0).
  r.chi2 = pearson_chi2(s.table, bins, k, r.chi2_df);
  r.chi2_p = chi2_upper_tail(r.chi2, r.chi2_df);
  if (r.chi2_df > 0) r.defined |= defined_bit(Criterion::kChi2);
  if (options.mi == MiEstimator::kBinned ? r.chi2_df > 0 : finite && classes_with_two >= 2)
    r.defined |= defined_bit(Criterion::kMi);

  if (!finite || !f_defined) return r;

  // One-way ANOVA F over the k_obs classes with an observed value: class means first, then the
  // within-class squares about them (two passes, so no cancellation from sums of squares).
  s.class_mean.assign(ku, 0.0);
  double between = 0;
  for (std::size_t c = 0; c < ku; ++c) {
    if (s.class_count[c] == 0) continue;
    s.class_mean[c] = s.class_sum[c] / static_cast<double>(s.class_count[c]);
    const double d = s.class_mean[c] - stats.mean;
    between += static_cast<double>(s.class_count[c]) * d * d;
  }
  double within = 0;
  for (std::int64_t i = 0; i < n_rows; ++i) {
    const float v = column[i];
    if (std::isnan(v)) continue;
    const double d = static_cast<double>(v) - s.class_mean[static_cast<std::size_t>(codes[static_cast<std::size_t>(i)])];
    within += d * d;
  }
  const double f_df1 = static_cast<double>(classes_observed - 1);
  const double f_df2 = dn - static_cast<double>(classes_observed);
  r.defined |= defined_bit(Criterion::kF);
  if (within > 0) {
    r.f = (between / f_df1) / (within / f_df2);
    r.f_p = f_upper_tail(r.f, f_df1, f_df2);
  } else {
    r.f = kInf;
    r.f_p = 0;
    r.flags |= kScoreSeparates;
  }

  return r;
}

}  // namespace

FeatureScores score_features(const ConstMatrixRef& m, std::span<const std::int64_t> features,
                             const ClassCodes& classes, const ScoreOptions& options,
                             std::span<const ColumnStats> stats) {
  const int k = static_cast<int>(classes.classes.size());
  if (k < 2)
    throw Error(ErrorKind::kInput,
                "the labels have " + std::to_string(k) + " class" + (k == 1 ? " (" + classes.classes[0] + ")" : "") +
                    "; scoring against a label needs at least two (check the label column)");
  if (options.bins < 2) throw_usage_error("`bins` must be 2 or more");
  if (options.neighbors < 1) throw_usage_error("`neighbors` must be 1 or more");
  if (static_cast<std::int64_t>(classes.codes.size()) != m.rows())
    throw Error(ErrorKind::kOther, "internal: one class code per sample expected");
  if (!stats.empty() && stats.size() != features.size())
    throw Error(ErrorKind::kOther, "internal: one ColumnStats per scored feature expected");

  const std::size_t p = features.size();
  FeatureScores out;
  out.feature.assign(features.begin(), features.end());
  std::vector<Result> results(p);
  // An exception must not leave an OpenMP region (std::terminate): keep the first and rethrow.
  std::exception_ptr failure;
  const int threads = internal::thread_count(options.threads);
  std::vector<Scratch> scratch(static_cast<std::size_t>(threads));
  ProgressStep progress("scoring", static_cast<std::int64_t>(p), "features");
  internal::for_each_column(m, features, threads, [&](std::size_t j) {
    progress.add(1);
    try {
      results[j] = score_one(m.col(features[j]).data(), m.rows(), classes.codes, k, options,
                             scratch[static_cast<std::size_t>(omp_get_thread_num())],
                             stats.empty() ? nullptr : &stats[j]);
    } catch (...) {
#pragma omp critical(pare_score_failure)
      if (!failure) failure = std::current_exception();
    }
  });
  if (failure) std::rethrow_exception(failure);
  if (options.counts_chi2)
    for (std::size_t j = 0; j < p; ++j)
      if (results[j].negative)
        throw Error(ErrorKind::kInput,
                    "chi2-counts needs non-negative counts, but feature " + std::to_string(features[j] + 1) +
                        " has negative values (rank by chi2, f or mi instead)");

  auto take = [&](auto member) {
    std::vector<double> v(p);
    for (std::size_t j = 0; j < p; ++j) v[j] = results[j].*member;
    return v;
  };
  out.mi = take(&Result::mi);
  out.chi2 = take(&Result::chi2);
  out.chi2_p = take(&Result::chi2_p);
  out.f = take(&Result::f);
  out.f_p = take(&Result::f_p);
  out.variance = take(&Result::variance);
  out.missing_rate = take(&Result::missing_rate);
  out.chi2_df.resize(p);
  out.flags.resize(p);
  out.defined.resize(p);
  for (std::size_t j = 0; j < p; ++j) {
    out.chi2_df[j] = results[j].chi2_df;
    out.flags[j] = results[j].flags;
    out.defined[j] = results[j].defined;
  }
  out.chi2_q = bh_adjust(out.chi2_p);
  out.chi2_bonferroni = bonferroni_adjust(out.chi2_p);
  out.f_q = bh_adjust(out.f_p);
  out.f_bonferroni = bonferroni_adjust(out.f_p);
  if (options.counts_chi2) {
    out.chi2_counts = take(&Result::counts);
    out.chi2_counts_p = take(&Result::counts_p);
    out.chi2_counts_q = bh_adjust(out.chi2_counts_p);
    out.chi2_counts_bonferroni = bonferroni_adjust(out.chi2_counts_p);
  }
  return out;
}

double criterion_score(const FeatureScores& s, Criterion c, std::size_t i) {
  switch (c) {
    case Criterion::kMi: return s.mi[i];
    case Criterion::kChi2: return s.chi2[i];
    case Criterion::kChi2Counts: return s.chi2_counts.empty() ? 0.0 : s.chi2_counts[i];
    case Criterion::kF: return s.f[i];
    case Criterion::kPearson: return std::abs(s.pearson_r[i]);
    case Criterion::kSpearman: return std::abs(s.spearman_rho[i]);
    case Criterion::kVariance: break;
  }
  return s.variance[i];
}

double criterion_q(const FeatureScores& s, Criterion c, std::size_t i) {
  switch (c) {
    case Criterion::kMi: return s.continuous ? s.spearman_q[i] : s.chi2_q[i];
    case Criterion::kChi2: return s.chi2_q[i];
    case Criterion::kChi2Counts: return s.chi2_counts_q.empty() ? 1.0 : s.chi2_counts_q[i];
    case Criterion::kF: return s.f_q[i];
    case Criterion::kPearson: return s.pearson_q[i];
    case Criterion::kSpearman: return s.spearman_q[i];
    case Criterion::kVariance: break;
  }
  return 1.0;
}

bool criterion_fits(Criterion c, bool continuous) {
  switch (c) {
    case Criterion::kMi:
    case Criterion::kVariance: return true;
    case Criterion::kChi2:
    case Criterion::kChi2Counts:
    case Criterion::kF: return !continuous;
    case Criterion::kPearson:
    case Criterion::kSpearman: break;
  }
  return continuous;
}

void require_criterion_fits(Criterion c, bool continuous) {
  if (criterion_fits(c, continuous)) return;
  if (continuous)
    throw_usage_error(std::string("`rank_by` ") + criterion_name(c) + " scores classes, not a continuous target",
                      "rank a target by spearman, pearson, mi or variance");
  throw_usage_error(std::string("`rank_by` ") + criterion_name(c) + " scores a continuous target, not classes",
                    "rank classes by mi, chi2, chi2-counts, f or variance; a numeric column is a target with `target`");
}

bool criterion_defined(const FeatureScores& s, Criterion c, std::size_t i) {
  if (c == Criterion::kVariance) return true;
  return i < s.defined.size() && (s.defined[i] & defined_bit(c)) != 0;
}

std::vector<std::size_t> rank_order(const FeatureScores& scores, Criterion criterion) {
  std::vector<std::size_t> order(scores.size());
  std::iota(order.begin(), order.end(), std::size_t{0});
  // NaN (the variance of a feature with an infinite value) sorts last: a NaN in the comparison
  // would break the strict weak order the sort needs.
  auto key = [&](std::size_t i) {
    const double v = criterion_score(scores, criterion, i);
    return std::isnan(v) ? -kInf : v;
  };
  std::stable_sort(order.begin(), order.end(),
                   [&](std::size_t a, std::size_t b) { return key(a) > key(b); });
  return order;
}

std::string score_flag_names(std::uint8_t flags) {
  std::string out;
  auto add = [&](std::uint8_t bit, const char* name) {
    if (!(flags & bit)) return;
    if (!out.empty()) out += ',';
    out += name;
  };
  add(kScoreFewValues, "few_values");
  add(kScoreConstant, "constant");
  add(kScoreSeparates, "separates_classes");
  return out;
}

namespace {

// The start of a ranking.tsv line: rank, the feature's name and its --feature-info columns.
void append_row_start(std::string& out, std::size_t rank, std::size_t feature,
                      const std::vector<std::string>& feature_names,
                      const std::vector<std::vector<std::string>>& info) {
  out += std::to_string(rank);
  out += '\t';
  internal::append_field(out, feature_names[feature], '\t');
  for (const auto& column : info) {
    out += '\t';
    internal::append_field(out, column[feature], '\t');
  }
}

// ranking.tsv against a continuous target, after the header's `rank, feature, info...` in `out`.
std::string ranking_tsv_continuous(const FeatureScores& s, std::span<const std::size_t> order,
                                   const std::vector<std::string>& feature_names,
                                   const std::vector<std::vector<std::string>>& info, std::string& out) {
  out += "\tpearson_r\tpearson_p\tpearson_q\tspearman_rho\tspearman_p\tspearman_q\tmi\tvariance\tmissing_rate"
         "\tindex\tflags\n";
  for (std::size_t r = 0; r < order.size(); ++r) {
    const std::size_t i = order[r];
    append_row_start(out, r + 1, static_cast<std::size_t>(s.feature[i]), feature_names, info);
    for (const double v : {s.pearson_r[i], s.pearson_p[i], s.pearson_q[i], s.spearman_rho[i], s.spearman_p[i],
                           s.spearman_q[i], s.mi[i], s.variance[i], s.missing_rate[i]}) {
      out += '\t';
      internal::append_number(out, v);
    }
    out += '\t' + std::to_string(s.feature[i] + 1) + '\t' + score_flag_names(s.flags[i]) + '\n';
  }
  return std::move(out);
}

}  // namespace

std::string ranking_tsv(const FeatureScores& s, std::span<const std::size_t> order,
                        const std::vector<std::string>& feature_names, bool with_counts,
                        const std::vector<std::string>& info_names,
                        const std::vector<std::vector<std::string>>& info) {
  std::string out = "rank\tfeature";
  for (const auto& name : info_names) {
    out += '\t';
    internal::append_field(out, name, '\t');
  }
  if (s.continuous) return ranking_tsv_continuous(s, order, feature_names, info, out);
  out += "\tmi\tchi2\tchi2_p\tchi2_q\tf\tf_p\tf_q\tvariance\tmissing_rate";
  if (with_counts) out += "\tchi2_counts\tchi2_counts_p\tchi2_counts_q";
  out += "\tchi2_bonferroni\tf_bonferroni";
  if (with_counts) out += "\tchi2_counts_bonferroni";
  out += "\tchi2_df\tindex\tflags\n";
  auto num = [&](double v) {
    out += '\t';
    internal::append_number(out, v);
  };
  for (std::size_t r = 0; r < order.size(); ++r) {
    const std::size_t i = order[r];
    append_row_start(out, r + 1, static_cast<std::size_t>(s.feature[i]), feature_names, info);
    num(s.mi[i]);
    num(s.chi2[i]);
    num(s.chi2_p[i]);
    num(s.chi2_q[i]);
    num(s.f[i]);
    num(s.f_p[i]);
    num(s.f_q[i]);
    num(s.variance[i]);
    num(s.missing_rate[i]);
    if (with_counts) {
      num(s.chi2_counts[i]);
      num(s.chi2_counts_p[i]);
      num(s.chi2_counts_q[i]);
    }
    num(s.chi2_bonferroni[i]);
    num(s.f_bonferroni[i]);
    if (with_counts) num(s.chi2_counts_bonferroni[i]);
    out += '\t' + std::to_string(s.chi2_df[i]) + '\t' + std::to_string(s.feature[i] + 1) + '\t' +
           score_flag_names(s.flags[i]) + '\n';
  }
  return out;
}

}  // namespace pare
