// The scores of one feature against class codes (binned MI and the chi-square test, the kNN MI, the
// one-way ANOVA F, the counts chi-square): the per-feature work of score_features, and the same on
// a subset of the rows with the feature's sort shared (internal/class_scores.h).
#include "internal/class_scores.h"

#include <algorithm>  // std::stable_sort, std::partition_point, std::lower_bound
#include <cmath>      // std::isnan, std::isfinite
#include <limits>     // std::numeric_limits
#include <numeric>    // std::iota

#include "internal/order_keys.h"

namespace pare {

namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();

using internal::defined_bit;
using internal::KnnScratch;
using internal::order_key;
using internal::sort_keys;
using internal::select_positions;

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
        const double* lo = std::partition_point(all_begin, all_end,
                                                [&](double v) { return v < xi && !(xi - v < d); });
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

double knn_mutual_information(std::span<const double> x, std::span<const int> y, int classes,
                              int k) {
  std::vector<std::size_t> order(x.size());
  std::iota(order.begin(), order.end(), std::size_t{0});
  std::stable_sort(order.begin(), order.end(),
                   [&](std::size_t a, std::size_t b) { return x[a] < x[b]; });
  std::vector<double> xs(x.size());
  std::vector<int> ys(x.size());
  for (std::size_t i = 0; i < order.size(); ++i) {
    xs[i] = x[order[i]];
    ys[i] = y[order[i]];
  }
  KnnScratch scratch;
  return knn_mi_sorted(xs, ys, classes, k, scratch);
}
namespace internal {

namespace {

// (rows' - 1)(cols' - 1) over the non-empty rows and columns of a rows x cols table, as
// pearson_chi2 reports it.
int table_df(const std::vector<double>& table, int rows, int cols) {
  int used_rows = 0;
  thread_local std::vector<char> used_col;
  used_col.assign(static_cast<std::size_t>(cols), 0);
  for (int r = 0; r < rows; ++r) {
    bool any = false;
    for (int c = 0; c < cols; ++c)
      if (table[static_cast<std::size_t>(r * cols + c)] > 0) {
        any = true;
        used_col[static_cast<std::size_t>(c)] = 1;
      }
    used_rows += any;
  }
  int used_cols = 0;
  for (const char u : used_col) used_cols += u;
  return std::max(0, (used_rows - 1) * (used_cols - 1));
}

// Everything after the class tallies (s.class_count, s.class_sum of the observed values of
// column[0..n_rows-1], in row order): the flags, the counts chi-square, the bin x class table
// with MI and the chi-square test, and F. `sorted_keys()` leaves in s.keys the observed values'
// keys (order_key << 32 | row) sorted by value, ties in row order; it is called only when the
// table or the kNN MI needs them. `threshold_table(bins)` may build the table of `bins` (< n)
// equal-frequency bins into s.table without those keys and return true, or return false.
template <typename SortedKeys, typename ThresholdTable>
ClassResult finish(const float* column, std::int64_t n_rows, std::span<const int> codes, int k,
                   const ScoreOptions& options, ClassScratch& s, const ColumnStats& stats,
                   const ClassWanted& wanted, SortedKeys&& sorted_keys,
                   ThresholdTable&& threshold_table) {
  ClassResult r;
  r.variance = stats.n >= 2 ? stats.variance : 0.0;
  r.missing_rate = stats.missing_rate();
  const auto ku = static_cast<std::size_t>(k);
  r.negative = stats.n > 0 && stats.min < 0;
  r.defined = defined_bit(Criterion::kVariance);
  // Classes of any size are scored (SPEC §9): MI and chi-square need only two distinct values; F
  // is taken over the classes with an observed value and needs two of them and more observed
  // values than classes (df2 = n - k_obs > 0).
  std::int64_t classes_observed = 0, classes_with_two = 0, n = 0;  // n: observed values
  for (auto count : s.class_count) {
    classes_observed += count >= 1;
    classes_with_two += count >= 2;
    n += count;
  }
  const bool every_class_observed = classes_observed == k;
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
      if (wanted.counts_p) r.counts_p = chi2_upper_tail(r.counts, df1);
      r.defined |= defined_bit(Criterion::kChi2Counts);
    }
  }
  if (r.flags & kScoreConstant) return r;  // defined result: the other scores 0, p-values 1

  const bool binned = options.mi == MiEstimator::kBinned;
  bool keys_sorted = false;
  if (wanted.table) {
    // Equal-frequency bins (SPEC §4) and the bin x class table. With bins >= n, floor(B L / n) is
    // strictly increasing in L, so bin L gives the same partition (the same table up to empty
    // rows, hence the same MI and chi-square) with n rows instead of B: a large --bins cannot
    // allocate a huge table.
    const bool by_rank = static_cast<std::int64_t>(options.bins) >= n;
    const int bins = by_rank ? static_cast<int>(n) : options.bins;
    s.table.assign(static_cast<std::size_t>(bins) * ku, 0.0);
    if (by_rank || !threshold_table(bins)) {
      sorted_keys();
      keys_sorted = true;
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
    }
    if (wanted.mi && binned) r.mi = mutual_information(s.table, bins, k);
    // pearson_chi2 drops empty bins and classes: df = (r - 1)(c - 1) of the non-empty table, and
    // a table with one non-empty row or column has df 0, chi-square 0, p 1 (and MI 0).
    if (wanted.chi2 || wanted.chi2_p) {
      r.chi2 = pearson_chi2(s.table, bins, k, r.chi2_df);
      if (wanted.chi2_p) r.chi2_p = chi2_upper_tail(r.chi2, r.chi2_df);
    } else {
      r.chi2_df = table_df(s.table, bins, k);
    }
    if (r.chi2_df > 0) r.defined |= defined_bit(Criterion::kChi2);
    if (binned && r.chi2_df > 0) r.defined |= defined_bit(Criterion::kMi);
  }
  if (wanted.mi && !binned && finite) {
    if (!keys_sorted) sorted_keys();
    // The estimator takes the values in the keys' order.
    s.values.clear();
    s.labels.clear();
    for (const std::uint64_t key : s.keys) {
      const auto row = static_cast<std::size_t>(key & 0xFFFFFFFFu);
      s.values.push_back(static_cast<double>(column[row]));
      s.labels.push_back(codes[row]);
    }
    r.mi = knn_mi_sorted(s.values, s.labels, k, options.neighbors, s.knn);
  }
  if (!binned && finite && classes_with_two >= 2) r.defined |= defined_bit(Criterion::kMi);

  if (!finite || !f_defined) return r;
  r.defined |= defined_bit(Criterion::kF);
  if (!wanted.f) return r;

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
    const double d = static_cast<double>(v) -
                     s.class_mean[static_cast<std::size_t>(codes[static_cast<std::size_t>(i)])];
    within += d * d;
  }
  const double f_df1 = static_cast<double>(classes_observed - 1);
  const double f_df2 = dn - static_cast<double>(classes_observed);
  if (within > 0) {
    r.f = (between / f_df1) / (within / f_df2);
    if (wanted.f_p) r.f_p = f_upper_tail(r.f, f_df1, f_df2);
  } else {
    r.f = kInf;
    r.f_p = 0;
    r.flags |= kScoreSeparates;
  }
  return r;
}

// The class tallies of the observed values of column[0..n_rows-1], with `each(v, i)` called for
// every observed value on the same pass, in row order. Row i adds to lane i mod 4 of its class and
// the lanes are added in order at the end: neighbouring rows of one class no longer wait on each
// other's addition (a chain through memory that set the pace of this loop).
constexpr std::size_t kLanes = 4;

template <typename EachObserved>
void tally_classes(const float* column, std::int64_t n_rows, std::span<const int> codes, int k,
                   ClassScratch& s, EachObserved&& each) {
  const auto ku = static_cast<std::size_t>(k);
  s.lane_count.assign(kLanes * ku, 0);
  s.lane_sum.assign(kLanes * ku, 0.0);
  for (std::int64_t i = 0; i < n_rows; ++i) {
    const float v = column[i];
    if (std::isnan(v)) continue;
    const std::size_t at = (static_cast<std::size_t>(i) % kLanes) * ku +
                           static_cast<std::size_t>(codes[static_cast<std::size_t>(i)]);
    ++s.lane_count[at];
    s.lane_sum[at] += static_cast<double>(v);
    each(v, i);
  }
  s.class_count.assign(ku, 0);
  s.class_sum.assign(ku, 0.0);
  for (std::size_t lane = 0; lane < kLanes; ++lane)
    for (std::size_t c = 0; c < ku; ++c) {
      s.class_count[c] += s.lane_count[lane * ku + c];
      s.class_sum[c] += s.lane_sum[lane * ku + c];
    }
}

// The bin x class table of `bins` equal-frequency bins from the observed values' order keys and
// codes (in row order), without sorting rows: value v has bin floor(B L(v) / n), L(v) the number of
// values below v, and floor(B L / n) >= b exactly when L >= r_b = ceil(b n / B), that is when the
// r_b-th smallest value is below v. So bin(v) counts the thresholds t_b = the r_b-th smallest
// values (b = 1 .. B - 1) below v, found by a radix select (not a sort). Counts go to four lanes
// (as in tally_classes) and are whole numbers, so the table is exactly the one built from the
// sorted rows. [kmin, kmax] holds every key.
void table_by_thresholds(ClassScratch& s, int bins, int k, std::uint32_t kmin, std::uint32_t kmax) {
  const auto n = static_cast<std::int64_t>(s.value_keys.size());
  const auto ku = static_cast<std::size_t>(k), bu = static_cast<std::size_t>(bins);
  s.sorted_values = s.value_keys;
  s.sort_buffer.resize(s.value_keys.size());
  s.positions.resize(bu - 1);
  s.thresholds.resize(bu - 1);
  for (std::int64_t b = 1; b < bins; ++b) s.positions[static_cast<std::size_t>(b - 1)] = (b * n + bins - 1) / bins - 1;
  select_positions(s.sorted_values.data(), s.sort_buffer.data(), 0, n, kmin, kmax, s.positions.data(),
                   s.thresholds.data(), bins - 1);
  const std::uint32_t* t = s.thresholds.data();
  s.lane_table.assign(kLanes * bu * ku, 0);
  for (std::int64_t i = 0; i < n; ++i) {
    const std::uint32_t key = s.value_keys[static_cast<std::size_t>(i)];
    std::size_t bin = 0;
    if (bins <= 64) {
      for (int b = 0; b < bins - 1; ++b) bin += t[b] < key;
    } else {
      bin = static_cast<std::size_t>(std::lower_bound(t, t + bu - 1, key) - t);
    }
    ++s.lane_table[((static_cast<std::size_t>(i) % kLanes) * bu + bin) * ku +
                   static_cast<std::size_t>(s.value_codes[static_cast<std::size_t>(i)])];
  }
  for (std::size_t lane = 0; lane < kLanes; ++lane)
    for (std::size_t j = 0; j < bu * ku; ++j) s.table[j] += static_cast<double>(s.lane_table[lane * bu * ku + j]);
}

}  // namespace

ClassWanted wanted_for(Criterion c, bool test) {
  ClassWanted w;
  w.table = c == Criterion::kMi || c == Criterion::kChi2;
  w.chi2 = c == Criterion::kChi2;
  w.mi = c == Criterion::kMi;
  w.chi2_p = test && (c == Criterion::kMi || c == Criterion::kChi2);
  w.f = c == Criterion::kF;
  w.f_p = test && c == Criterion::kF;
  w.counts_p = test && c == Criterion::kChi2Counts;
  return w;
}

void sorted_value_keys(const float* column, std::int64_t n_rows, std::vector<std::uint64_t>& keys,
                       std::vector<std::uint64_t>& buffer) {
  keys.clear();
  for (std::int64_t i = 0; i < n_rows; ++i)
    if (!std::isnan(column[i]))
      keys.push_back(static_cast<std::uint64_t>(order_key(column[i])) << 32 |
                     static_cast<std::uint32_t>(i));
  sort_keys(keys, buffer);
}

ClassResult score_class_column(const float* column, std::int64_t n_rows, std::span<const int> codes,
                               int k, const ScoreOptions& options, ClassScratch& s,
                               const ColumnStats* known, const ClassWanted& wanted) {
  const ColumnStats stats =
      known ? *known
            : column_stats(std::span<const float>(column, static_cast<std::size_t>(n_rows)));
  // One pass: the class tallies, and the values' order keys with their classes for the table.
  s.value_keys.clear();
  s.value_codes.clear();
  tally_classes(column, n_rows, codes, k, s, [&](float v, std::int64_t i) {
    s.value_keys.push_back(order_key(v));
    s.value_codes.push_back(codes[static_cast<std::size_t>(i)]);
  });
  return finish(
      column, n_rows, codes, k, options, s, stats, wanted,
      [&] { sorted_value_keys(column, n_rows, s.keys, s.buffer); },
      [&](int bins) {
        // (min and max are values of the float column, so exact as floats)
        table_by_thresholds(s, bins, k, order_key(static_cast<float>(stats.min)), order_key(static_cast<float>(stats.max)));
        return true;
      });
}

ClassResult score_class_rows(const float* column, std::span<const std::int64_t> rows,
                             std::span<const std::int32_t> position,
                             std::span<const std::uint64_t> sorted, std::span<const int> codes,
                             int k, const ScoreOptions& options, ClassScratch& s,
                             const ClassWanted& wanted) {
  const auto n_rows = static_cast<std::int64_t>(rows.size());
  s.gathered.resize(rows.size());
  for (std::size_t i = 0; i < rows.size(); ++i) s.gathered[i] = column[rows[i]];
  const float* x = s.gathered.data();
  const ColumnStats stats = column_stats(std::span<const float>(x, rows.size()));
  tally_classes(x, n_rows, codes, k, s, [](float, std::int64_t) {});
  // The sorted keys of the subset: the column's, in the same order, with the row replaced by its
  // place in `rows` (ascending rows keep ties in row order).
  // Branch-free: about half the rows are in a subset, in no pattern a predictor could learn.
  return finish(
      x, n_rows, codes, k, options, s, stats, wanted,
      [&] {
        s.keys.resize(sorted.size() + 1);
        std::uint64_t* to = s.keys.data();
        for (const std::uint64_t key : sorted) {
          const std::int32_t at = position[key & 0xFFFFFFFFu];
          *to = (key & 0xFFFFFFFF00000000u) | static_cast<std::uint32_t>(at);
          to += at >= 0;
        }
        s.keys.resize(static_cast<std::size_t>(to - s.keys.data()));
      },
      [](int) { return false; });
}

}  // namespace internal

}  // namespace pare
