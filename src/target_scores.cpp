// Scores of features against a continuous target (SPEC §9): Pearson r, Spearman rho, their
// two-sided p-values and BH q-values, and the nearest-neighbour mutual information of two continuous
// variables. The declarations and their contract are in include/pare/ranking.h.
//
// Numerics.
//
// - Pearson r in two passes, all in double: the means first, then Σ(x−x̄)(t−t̄), Σ(x−x̄)² and
//   Σ(t−t̄)² about them, r = Sxt / √(Sxx·Stt), clipped to [−1, 1]. No E[x²] − E[x]² cancellation.
// - Spearman rho = Pearson r of the average ranks (1-based; a run of tied values at sorted positions
//   a..b shares (a+b)/2 + 1). The centred rank (a+b+1−n)/2 is a half-integer, so the rank sums are
//   exact (below 2^53) and rho is rounded only in the final division and square root.
// - p-value: two-sided Student t with ν = n − 2 df at t = r·√(ν/(1−r²)). Then ν/(ν+t²) = 1 − r², and
//   P(|T| ≥ |t|) = I_{1−r²}(ν/2, ½) (the regularised incomplete beta function, Boost.Math; this is how
//   Boost evaluates the t tail), with 1 − r² formed as (1−|r|)(1+|r|) so |r| near 1 loses nothing.
// - kNN MI (Kraskov, Stögbauer & Grassberger 2004, estimator 1, as scikit-learn's _compute_mi_cc
//   computes it; CHECKS §11): x and y each divided by its standard deviation (n denominator, not
//   centred), max-norm distance max(|Δx|, |Δy|), ε_i = the distance to the k-th nearest other point,
//   n_x(i), n_y(i) = the other points strictly closer than ε_i in x and in y, and
//   I = ψ(N) + ψ(k) − ⟨ψ(n_x+1)⟩ − ⟨ψ(n_y+1)⟩, clipped at 0. No noise is added.
// - Ties. Data on a grid (whole years, integer counts, values written to two decimals) put many
//   neighbours at exactly ε_i. Estimator 1 as written then leaves them all out of n_x and n_y while
//   ψ(k) still counts the k-th: n_x, n_y fall, and unrelated variables get a large MI. Simulation
//   (numpy; n = 500, k = 3, 20 samples per row; x, y standard normal with correlation ρ, both
//   rounded to a grid step in sd units; true MI −½ ln(1−ρ²) before rounding):
//
//     ρ     step   true    estimator 1   scale-first (scikit-learn)   this estimator
//     0     0      0       0.007         0.007                        0.007
//     0     0.05   0       0.170         0.159                        0.024
//     0     0.2    0       0.278         0.264                        0.024
//     0     1      0       0.023         0.022                        0.003
//     0.5   0.05   0.144   0.331         0.323                        0.164
//     0.5   0.2    0.144   0.405         0.390                        0.164
//     0.5   1      0.144   0.141         0.141                        0.121
//
//   So all three counts are taken in the same neighbourhood of radius ε_i, point i included: when
//   ε_i > 0 the open one (k_i = the points strictly closer than ε_i in both variables, n_x + 1 and
//   n_y + 1 those strictly closer in x and in y), and I = ψ(N) + ⟨ψ(k_i)⟩ − ⟨ψ(n_x+1)⟩ − ⟨ψ(n_y+1)⟩.
//   Without ties at ε_i the k − 1 nearer neighbours and the point are strictly inside, k_i = k, and
//   this is estimator 1 exactly (scikit-learn's values to 1e-9 in tests/target_test.cpp). When
//   ε_i = 0 (k or more others equal to it in both variables) the neighbourhood is the point's own
//   value, and the counts are those of Gao, Kannan, Oh & Viswanath ("Estimating Mutual
//   Information for Discrete-Continuous Mixtures", NeurIPS 2017) in their published code: k_i the
//   points equal to it in both variables, n_x + 1 and n_y + 1 those equal in x and in y, itself
//   included each time. For a purely discrete pair (every (x, y) cell holding more than k points)
//   this is ψ(N) + (1/N) Σ_cells n_xy [ψ(n_xy) − ψ(n_x) − ψ(n_y)], the plug-in MI with ψ in place
//   of ln. This is the rule of the class scores' kNN MI (notebooks-free-docs/numerics.md).
// - Distances are formed as |x_j − x_i|·(1/sd_x): the difference of the values as given (exact for
//   float32 data held in double), then scaled once, so equal differences give equal distances and
//   grid data keep their ties. Scaling each value first and subtracting after, as scikit-learn does,
//   rounds equal differences apart by the last bit of the standard deviation (on the diabetes
//   columns estimator 1 then moves by up to 6%). Where no two distances tie, both give the same
//   counts.
// - The neighbour search. The points are sorted by x once (a radix sort of order-preserving float
//   keys, as for the class scores; equal x ordered by y) and by y once (the target's order, sorted
//   once per call; equal y ordered by x), so the points nearest to point i along either axis sit
//   beside it in that order. The walk goes outwards from i along one axis, a few points on each
//   side in turn, keeping the k smallest max-norm distances met; a side stops when its next |Δ|
//   along the axis is at least the current k-th smallest, since no point further out can be nearer.
//   The walk then has passed every point with |Δ| < ε_i along its axis, so that count is read off
//   its extent, and the count along the other axis comes from two binary searches. Each point is
//   walked along the axis on which it looks sparser, where fewer points lie within ε_i. Points tied
//   along the axis form runs sorted by the other variable: a run is entered by a binary search and
//   walked outwards, so many equal values (zeros of count data) cost little. The work per point is
//   about the points walked, O(√(kN)) for independent variables, so O(N^1.5) per feature instead of
//   the O(N²) of comparing all pairs. ψ of integers comes from a per-thread table.
// - Each feature is scored on the rows where it is observed; the target's centred values, ranks,
//   sorted order and scale are prepared once for all rows and, for a feature with gaps, derived
//   again for its rows in O(N) from the full order.
// - Features are spread over threads, one thread computing a feature in a fixed order, so results
//   do not depend on the thread count.
#include <boost/math/special_functions/beta.hpp>
#include <boost/math/special_functions/digamma.hpp>

#include <algorithm>  // std::stable_sort, std::partition_point, std::lower_bound, std::max
#include <cmath>      // std::sqrt, std::abs, std::isnan, std::isfinite
#include <cstdint>    // std::int64_t, std::uint32_t, std::uint64_t
#include <exception>  // std::exception_ptr, std::current_exception, std::rethrow_exception
#include <limits>     // std::numeric_limits
#include <numeric>    // std::iota
#include <string>     // std::string
#include <vector>     // std::vector

#include "internal/columns.h"
#include "internal/omp.h"
#include "internal/order_keys.h"
#include "internal/target_scores.h"
#include "pare/error.h"
#include "pare/progress.h"
#include "pare/ranking.h"

namespace pare {

namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();

// Boost.Math evaluates double functions in long double by default; double is accurate to a few ulp
// here and faster (a tail is evaluated twice for every feature).
using DoublePolicy = boost::math::policies::policy<boost::math::policies::promote_double<false>>;

using internal::order_key;
using internal::prepare_target;
using internal::sort_keys;
using internal::stable_order;
using internal::TargetPrep;
using internal::TargetResult;
using internal::TargetWanted;

constexpr std::uint8_t defined_bit(Criterion c) {
  return static_cast<std::uint8_t>(1u << static_cast<unsigned>(c));
}

// ψ(m) for the integers 0 < m <= n (entry 0 unused): a per-thread table grown on demand, each entry
// Boost's digamma (accurate to an ulp or two, where the recurrence ψ(m+1) = ψ(m) + 1/m would add
// up its roundings). The same entries on every thread.
const double* psi_table(std::int64_t n) {
  thread_local std::vector<double> table{0.0};
  while (static_cast<std::int64_t>(table.size()) <= n)
    table.push_back(boost::math::digamma(static_cast<double>(table.size()), DoublePolicy()));
  return table.data();
}

// What every feature needs of the target on the rows it is scored on (all rows, or a feature's
// observed rows renumbered 0..n-1).
// The points of the kNN estimator, sorted both ways (see ksg()). Buffers reused from feature to
// feature (one set per thread).
// kPad values on either side of each array, so the walk can take kChunk steps without checking
// the ends: −∞ before and +∞ after a sorted coordinate (any point there is infinitely far), 0
// around the other one.
constexpr std::int64_t kChunk = 4;
constexpr std::int64_t kPad = kChunk;

class Padded {
 public:
  void assign(std::int64_t n, double before, double after) {
    buffer_.assign(static_cast<std::size_t>(n + 2 * kPad), before);
    std::fill(buffer_.begin() + kPad + n, buffer_.end(), after);
  }
  double* data() { return buffer_.data() + kPad; }
  const double* data() const { return buffer_.data() + kPad; }
  double& operator[](std::size_t i) { return data()[i]; }

 private:
  std::vector<double> buffer_;
};

struct KsgData {
  std::int64_t n = 0;
  double rx = 0, ry = 0;             // 1 / sd of x and of y: a distance is |Δ|·r
  double sx = 0, sy = 0;             // 1 / rx, 1 / ry
  Padded xs, ys;                     // by ascending x (a run of equal x by ascending y): x and y
  Padded ys_sorted;                  // by ascending y (a run of equal y by ascending x): y
  Padded xs_y;                       //   and x
  std::vector<std::int64_t> pos_y;   // per x-position, the point's y-position
  std::vector<std::int64_t> row;     // per x-position, the point's index in the input
  bool x_ties = false, y_ties = false;
  std::vector<std::int64_t> x_first, x_last, y_first, y_last;  // runs of equal values, when tied
  std::vector<std::uint32_t> fill;   // placement counters
  std::vector<double> best;          // the k smallest distances when k > kMaxUnrolled
};

// Runs of equal values of ascending v: first[j] and last[j] are the ends of j's run. True when
// some run is longer than one value (the arrays are filled only then).
bool find_runs(const double* v, std::int64_t n, std::vector<std::int64_t>& first, std::vector<std::int64_t>& last) {
  bool ties = false;
  for (std::int64_t j = 1; j < n && !ties; ++j) ties = v[j] == v[j - 1];
  if (!ties) return false;
  first.resize(static_cast<std::size_t>(n));
  last.resize(static_cast<std::size_t>(n));
  for (std::int64_t j = 0; j < n; ++j) {
    const auto u = static_cast<std::size_t>(j);
    first[u] = j > 0 && v[j] == v[j - 1] ? first[u - 1] : j;
  }
  for (std::int64_t j = n; j-- > 0;) {
    const auto u = static_cast<std::size_t>(j);
    last[u] = j + 1 < n && v[j] == v[j + 1] ? last[u + 1] : j;
  }
  return true;
}

// Completes `d` from d.row (the points in ascending x, equal x in ascending target order), x of
// every point (by input index), 1 / sd of x, and the target prepared on the same points.
void arrange_points(std::span<const double> x, double rx, const TargetPrep& t, KsgData& d) {
  const std::int64_t n = t.n;
  const auto nu = static_cast<std::size_t>(n);
  d.n = n;
  d.rx = rx;
  d.ry = t.inv_sd;
  d.sx = 1 / rx;
  d.sy = 1 / t.inv_sd;
  d.xs.assign(n, -kInf, kInf);
  d.ys.assign(n, 0, 0);
  for (std::size_t i = 0; i < nu; ++i) {
    const auto r = static_cast<std::size_t>(d.row[i]);
    d.xs[i] = x[r];
    d.ys[i] = t.values[r];
  }
  // The y order with equal y in ascending x: the points taken in x order, each placed at the next
  // free position of its run of equal y.
  d.fill.resize(nu);
  for (std::size_t q = 0; q < nu; ++q) d.fill[q] = static_cast<std::uint32_t>(q);
  d.ys_sorted.assign(n, -kInf, kInf);
  std::copy(t.sorted.begin(), t.sorted.end(), d.ys_sorted.data());
  d.xs_y.assign(n, 0, 0);
  d.pos_y.resize(nu);
  for (std::size_t i = 0; i < nu; ++i) {
    const std::uint32_t q = d.fill[t.run_start[static_cast<std::size_t>(d.row[i])]]++;
    d.pos_y[i] = q;
    d.xs_y[q] = d.xs[i];
  }
  d.x_ties = find_runs(d.xs.data(), n, d.x_first, d.x_last);
  d.y_ties = find_runs(d.ys_sorted.data(), n, d.y_first, d.y_last);
}

// The k smallest distances offered so far, ascending, kept by a min/max network: no branch, and for
// k <= kMaxUnrolled in registers (a branch per distance, or an array in memory, costs several
// times as much: most distances are not among the k smallest, but which ones are is unpredictable).
constexpr int kMaxUnrolled = 8;

template <int K>
struct FixedBest {
  double v[K];
  explicit FixedBest(int) {
    for (double& b : v) b = kInf;
  }
  double kth() const { return v[K - 1]; }
  int below_kth() const {  // how many of the k are smaller than the k-th
    int count = 0;
    for (int j = 0; j + 1 < K; ++j) count += v[j] < v[K - 1];
    return count;
  }
  void offer(double d) {
    double c = d;
    for (int j = 0; j < K; ++j) {
      const double lo = std::min(v[j], c);
      c = std::max(v[j], c);
      v[j] = lo;
    }
  }
};

struct DynamicBest {
  double* v;
  int k;
  DynamicBest(double* storage, int k_) : v(storage), k(k_) {
    for (int j = 0; j < k; ++j) v[j] = kInf;
  }
  double kth() const { return v[k - 1]; }
  int below_kth() const {
    int count = 0;
    for (int j = 0; j + 1 < k; ++j) count += v[j] < v[k - 1];
    return count;
  }
  void offer(double d) {
    double c = d;
    for (int j = 0; j < k; ++j) {
      const double lo = std::min(v[j], c);
      c = std::max(v[j], c);
      v[j] = lo;
    }
  }
};

// The walk for point p along one axis: a ascending, b the other coordinate in the same order
// (inside a run of equal a, ascending), both padded, first/last the runs of a when `Ties`. Offers
// to `best` every point with |Δa| below the current k-th distance, going outwards on both sides in
// turn; a side stops at a point with |Δa| >= the k-th distance. Since the k-th distance
// only decreases, every point left out is at least the final k-th distance away: that is ε_p, and
// every point with |Δa| < ε_p lies in the walked range. Returns ε_p and, when ε_p > 0, in `count`
// the points with |Δa| < ε_p and in `joint` those with distance < ε_p, p included each time (the
// points nearer than the k-th are among the k smallest kept). `best` is taken by value so that it
// lives in registers.
constexpr std::int64_t kShortRun = 8;

template <bool Ties, typename Best>
double walk(const double* a, const double* b, double ra, double rb, const std::int64_t* first,
            const std::int64_t* last, std::int64_t n, std::int64_t p, Best best, std::int64_t& count,
            std::int64_t& joint) {
  const double ai = a[p], bi = b[p];
  std::int64_t lo = p, hi = p;  // the walked range
  if constexpr (Ties) {
    // The points of the run [c, e] at distance d in a, outwards in b from b_i while |Δb| < the
    // k-th distance (only those can be nearer).
    auto offer_run = [&](std::int64_t c, std::int64_t e, double d) {
      if (e - c < kShortRun) {  // a short run: every point offered, no search
        for (std::int64_t j = c; j <= e; ++j) best.offer(std::max(d, std::abs(b[j] - bi) * rb));
        return;
      }
      const std::int64_t q = std::lower_bound(b + c, b + e + 1, bi) - b;
      for (std::int64_t j = q - 1; j >= c && (bi - b[j]) * rb < best.kth(); --j) best.offer(std::max(d, (bi - b[j]) * rb));
      for (std::int64_t j = q; j <= e && (b[j] - bi) * rb < best.kth(); ++j) best.offer(std::max(d, (b[j] - bi) * rb));
    };
    // Its own run (Δa = 0), outwards from p.
    lo = first[p];
    hi = last[p];
    for (std::int64_t j = p - 1; j >= lo && (bi - b[j]) * rb < best.kth(); --j) best.offer((bi - b[j]) * rb);
    for (std::int64_t j = p + 1; j <= hi && (b[j] - bi) * rb < best.kth(); ++j) best.offer((b[j] - bi) * rb);
    bool go_left = lo > 0, go_right = hi + 1 < n;
    while (go_left || go_right) {
      if (go_left) {
        const double d = (ai - a[lo - 1]) * ra;
        go_left = d < best.kth();
        if (go_left) {
          const std::int64_t c = first[lo - 1];
          offer_run(c, lo - 1, d);
          lo = c;
          go_left = lo > 0;
        }
      }
      if (go_right) {
        const double d = (a[hi + 1] - ai) * ra;
        go_right = d < best.kth();
        if (go_right) {
          const std::int64_t e = last[hi + 1];
          offer_run(hi + 1, e, d);
          hi = e;
          go_right = hi + 1 < n;
        }
      }
    }
  } else {
    // kChunk points a side at a time, the stop tested once per chunk: a point offered beyond the
    // stop is at least the k-th distance away and changes nothing, and the padding (infinitely far)
    // stops a side at the ends.
    bool go_left = true, go_right = true;
    while (go_left || go_right) {
      if (go_left) {
        for (std::int64_t c = 1; c <= kChunk; ++c)
          best.offer(std::max((ai - a[lo - c]) * ra, std::abs(b[lo - c] - bi) * rb));
        lo -= kChunk;
        go_left = (ai - a[lo]) * ra < best.kth();
      }
      if (go_right) {
        for (std::int64_t c = 1; c <= kChunk; ++c)
          best.offer(std::max((a[hi + c] - ai) * ra, std::abs(b[hi + c] - bi) * rb));
        hi += kChunk;
        go_right = (a[hi] - ai) * ra < best.kth();
      }
    }
  }
  const double eps = best.kth();
  if (eps > 0) {
    // Trim the walked range to |Δa| < ε (whole runs when a has ties).
    while ((ai - a[lo]) * ra >= eps) lo = Ties ? last[lo] + 1 : lo + 1;
    while ((a[hi] - ai) * ra >= eps) hi = Ties ? first[hi] - 1 : hi - 1;
    count = hi - lo + 1;
    joint = 1 + best.below_kth();
  }
  return eps;
}

// The first position in [begin, end) of ascending v at which pred is false (end if none), pred
// true on a prefix: a binary search whose steps are conditional moves rather than branches (the
// positions of successive queries are unrelated, so a branch would be mispredicted half the time).
template <typename Pred>
std::int64_t first_false(const double* v, std::int64_t begin, std::int64_t end, Pred pred) {
  if (begin >= end) return end;
  const double* base = v + begin;
  std::int64_t len = end - begin;
  while (len > 1) {
    const std::int64_t half = len / 2;
    base = pred(base[half]) ? base + half : base;
    len -= half;
  }
  return (base - v) + (pred(*base) ? 1 : 0);
}

// The points of ascending v[0..n-1] with |v − c|·r < eps (the distance formed as in the walk),
// c being v[pos]. Δ·r is monotone in Δ, so |v − c|·r < eps exactly when |v − c| < D, D the
// smallest double with D·r >= eps: found from the guess eps·s (s = 1/r, within an ulp or two) by
// steps of one ulp. The two binary searches then compare differences with D alone. Both ends are
// looked for within kWindow positions of pos (where they nearly always are), then, if not found
// there, in the rest.
constexpr std::int64_t kWindow = 64;

std::int64_t count_within(const double* v, std::int64_t n, std::int64_t pos, double r, double s, double eps) {
  double limit = eps * s;
  if (limit * r >= eps) {
    for (double down = std::nextafter(limit, 0.0); down * r >= eps; down = std::nextafter(limit, 0.0)) limit = down;
  } else {
    do limit = std::nextafter(limit, kInf);
    while (limit * r < eps);
  }
  const double c = v[pos];
  auto below = [&](double u) { return c - u >= limit; };             // below c, not within eps
  auto inside_or_below = [&](double u) { return u - c < limit; };  // not above c by eps or more
  const std::int64_t a = pos - kWindow, b = pos + 1 + kWindow;
  if (a >= 0 && b < n && below(v[a]) && !inside_or_below(v[b])) {
    // The common case: both ends inside their windows, [a, pos) and [pos + 1, b), of equal length:
    // the two searches step together (two independent chains of loads keep the processor busier).
    const double* f = v + a;
    const double* l = v + pos + 1;
    for (std::int64_t len = kWindow; len > 1;) {
      const std::int64_t half = len / 2;
      f = below(f[half]) ? f + half : f;
      l = inside_or_below(l[half]) ? l + half : l;
      len -= half;
    }
    return (l + (inside_or_below(*l) ? 1 : 0)) - (f + (below(*f) ? 1 : 0));
  }
  const std::int64_t first = a > 0 && !below(v[a])   ? first_false(v, 0, a, below)
                             : a > 0                 ? first_false(v, a, pos, below)
                                                     : first_false(v, 0, pos, below);
  const std::int64_t last = b < n && inside_or_below(v[b]) ? first_false(v, b + 1, n, inside_or_below)
                                                            : first_false(v, pos + 1, std::min(b, n), inside_or_below);
  return last - first;
}

// The estimator on the points of `d` (n > k, neither variable constant). See the top of the file.
// Each point is walked along the axis on which it looks sparser (the wider span, in sd units, of
// the kSpan positions on either side of it in that order: about as many as lie within ε of it
// along an axis for independent variables at N = 1,000), as fewer points then lie within ε of it
// along that axis; the count along the other axis comes from count_within. ε and both counts do
// not depend on the axis. (Spans of k positions choose worse: 7% more time on bench_target.)
constexpr std::int64_t kSpan = 32;

template <typename MakeBest>
double ksg(const KsgData& d, int k, MakeBest make_best) {
  const std::int64_t n = d.n;
  const double* psi = psi_table(std::max<std::int64_t>(n, k));
  const double* xs = d.xs.data();
  const double* ys = d.ys.data();
  const double* ysort = d.ys_sorted.data();
  const double* xs_y = d.xs_y.data();  // all four padded
  double sum_k = 0, sum_x = 0, sum_y = 0;
  bool every_k = true;
  for (std::int64_t p = 0; p < n; ++p) {
    const std::int64_t q = d.pos_y[static_cast<std::size_t>(p)];
    const double span_x = (xs[std::min(n - 1, p + kSpan)] - xs[std::max<std::int64_t>(0, p - kSpan)]) * d.rx;
    const double span_y = (ysort[std::min(n - 1, q + kSpan)] - ysort[std::max<std::int64_t>(0, q - kSpan)]) * d.ry;
    const auto best = make_best();
    std::int64_t nx = 0, ny = 0, ki = k;
    double eps;
    if (span_x >= span_y) {
      eps = d.x_ties ? walk<true>(xs, ys, d.rx, d.ry, d.x_first.data(), d.x_last.data(), n, p, best, nx, ki)
                     : walk<false>(xs, ys, d.rx, d.ry, nullptr, nullptr, n, p, best, nx, ki);
      if (eps > 0) ny = count_within(ysort, n, q, d.ry, d.sy, eps);
    } else {
      eps = d.y_ties ? walk<true>(ysort, xs_y, d.ry, d.rx, d.y_first.data(), d.y_last.data(), n, q, best, ny, ki)
                     : walk<false>(ysort, xs_y, d.ry, d.rx, nullptr, nullptr, n, q, best, ny, ki);
      if (eps > 0) nx = count_within(xs, n, p, d.rx, d.sx, eps);
    }
    if (!(eps > 0)) {
      // Zero radius (k others equal to p in both variables): Gao et al.'s counts, p included:
      // equal in x, equal in y, and equal in both (within the run of equal x, y ascends).
      const auto same_x = std::equal_range(xs, xs + n, xs[p]);
      const auto same_y = std::equal_range(ysort, ysort + n, ys[p]);
      const auto same = std::equal_range(ys + (same_x.first - xs), ys + (same_x.second - xs), ys[p]);
      nx = same_x.second - same_x.first;
      ny = same_y.second - same_y.first;
      ki = same.second - same.first;
    }
    every_k = every_k && ki == k;
    sum_k += psi[ki];
    sum_x += psi[nx];
    sum_y += psi[ny];
  }
  // Without ties at ε, k_i = k for every point: ψ(k) itself, as estimator 1 writes it.
  const double dn = static_cast<double>(n);
  const double mi = every_k ? psi[n] + psi[k] - sum_x / dn - sum_y / dn
                            : psi[n] + sum_k / dn - sum_x / dn - sum_y / dn;
  return std::max(0.0, mi);
}

template <int K>
double ksg_fixed(const KsgData& d) {
  return ksg(d, K, [] { return FixedBest<K>(K); });
}

double ksg_estimate(KsgData& d, int k) {
  switch (k) {
    case 1: return ksg_fixed<1>(d);
    case 2: return ksg_fixed<2>(d);
    case 3: return ksg_fixed<3>(d);
    case 4: return ksg_fixed<4>(d);
    case 5: return ksg_fixed<5>(d);
    case 6: return ksg_fixed<6>(d);
    case 7: return ksg_fixed<7>(d);
    case 8: return ksg_fixed<8>(d);
    default: break;
  }
  static_assert(kMaxUnrolled == 8, "the cases above cover 1..kMaxUnrolled");
  d.best.resize(static_cast<std::size_t>(k));
  double* storage = d.best.data();
  return ksg(d, k, [&] { return DynamicBest(storage, k); });
}

}  // namespace

// Per-thread buffers for one feature at a time.
struct internal::TargetScorer::Buffers {
  std::vector<std::uint64_t> keys, buffer;
  std::vector<double> x_values;
  KsgData ksg;
  // A feature with gaps: its observed rows' values and the target prepared on them.
  std::vector<std::int64_t> compact;  // row -> position among the observed rows, or -1
  std::vector<float> x_sub;
  std::vector<double> t_sub;
  TargetPrep sub;
};

namespace {

using Scratch = internal::TargetScorer::Buffers;

// Sxy / √(Sxx·Syy), clipped to [−1, 1]: one square root (so exactly linear data give ±1), or two
// when the product would overflow or underflow.
double correlation(double sxy, double sxx, double syy) {
  const double product = sxx * syy;
  const double norm = product > std::numeric_limits<double>::min() && product < kInf
                          ? std::sqrt(product)
                          : std::sqrt(sxx) * std::sqrt(syy);
  return std::max(-1.0, std::min(1.0, sxy / norm));
}

// The scores of the values x[0..t.n-1] (no NaN, not constant) against the prepared target (not
// constant), those `w` asks for.
void score_values(const float* x, const TargetPrep& t, bool finite, int k, const TargetWanted& w, Scratch& s,
                  TargetResult& r) {
  const std::int64_t n = t.n;
  const auto nu = static_cast<std::size_t>(n);
  const double dn = static_cast<double>(n);
  const bool mi = w.mi && finite && n > k;
  if (w.spearman || mi) {
    // Sorted by x, equal x in target order: the keys pushed in target order, then a stable sort.
    s.keys.resize(nu);
    for (std::size_t i = 0; i < nu; ++i) {
      const std::uint32_t row = t.order[i];
      s.keys[i] = static_cast<std::uint64_t>(order_key(x[row])) << 32 | row;
    }
    sort_keys(s.keys, s.buffer);
  }
  if (w.spearman && n >= 3) {
    // Spearman: the centred average rank of a run at sorted positions a..b is (a+b+1−n)/2.
    double sxy = 0, sxx = 0;
    for (std::size_t a = 0; a < nu;) {
      std::size_t b = a;
      while (b + 1 < nu && (s.keys[b + 1] >> 32) == (s.keys[a] >> 32)) ++b;
      const double rc = (static_cast<double>(a + b + 1) - dn) / 2;
      for (std::size_t i = a; i <= b; ++i) {
        sxy += rc * t.rank_centred[s.keys[i] & 0xFFFFFFFFu];
        sxx += rc * rc;
      }
      a = b + 1;
    }
    r.spearman_rho = correlation(sxy, sxx, t.rank_ss);
    if (w.p) r.spearman_p = correlation_p(r.spearman_rho, n);
    r.defined |= defined_bit(Criterion::kSpearman);
  }
  if (!finite || !(w.pearson || mi)) return;

  // Pearson in two passes; Sxx also gives the MI's scale of x.
  double sum = 0;
  for (std::size_t i = 0; i < nu; ++i) sum += static_cast<double>(x[i]);
  const double mean = sum / dn;
  double sxx = 0, sxt = 0;
  for (std::size_t i = 0; i < nu; ++i) {
    const double d = static_cast<double>(x[i]) - mean;
    sxx += d * d;
    sxt += d * t.centred[i];
  }
  if (w.pearson && n >= 3) {
    r.pearson_r = correlation(sxt, sxx, t.ss);
    if (w.p) r.pearson_p = correlation_p(r.pearson_r, n);
    r.defined |= defined_bit(Criterion::kPearson);
  }
  if (mi) {
    s.x_values.resize(nu);
    for (std::size_t i = 0; i < nu; ++i) s.x_values[i] = static_cast<double>(x[i]);
    s.ksg.row.resize(nu);
    for (std::size_t i = 0; i < nu; ++i) s.ksg.row[i] = static_cast<std::int64_t>(s.keys[i] & 0xFFFFFFFFu);
    arrange_points(s.x_values, 1 / std::sqrt(sxx / dn), t, s.ksg);
    r.mi = ksg_estimate(s.ksg, k);
    r.defined |= defined_bit(Criterion::kMi);
  }
}

TargetResult score_one(const float* column, std::int64_t n_rows, const TargetPrep& full,
                       std::span<const double> target, int k, Scratch& s, const ColumnStats* known,
                       const TargetWanted& w) {
  TargetResult r;
  const ColumnStats stats =
      known ? *known : column_stats(std::span<const float>(column, static_cast<std::size_t>(n_rows)));
  r.variance = stats.n >= 2 ? stats.variance : 0.0;
  r.missing_rate = stats.missing_rate();
  r.defined = defined_bit(Criterion::kVariance);
  if (stats.n < 3) r.flags |= kScoreFewValues;
  if (stats.n == 0 || stats.min == stats.max) {
    r.flags |= kScoreConstant;
    return r;
  }
  const bool finite = std::isfinite(stats.min) && std::isfinite(stats.max);
  if (stats.missing == 0) {
    if (!full.constant) score_values(column, full, finite, k, w, s, r);
    return r;
  }
  // Gaps: the observed rows renumbered 0..m-1, and the target prepared on them, its order taken
  // from the full order (ties stay in row order), so nothing is sorted again.
  const auto rows = static_cast<std::size_t>(n_rows);
  s.compact.resize(rows);
  s.x_sub.clear();
  s.t_sub.clear();
  for (std::size_t i = 0; i < rows; ++i) {
    if (std::isnan(column[i])) {
      s.compact[i] = -1;
      continue;
    }
    s.compact[i] = static_cast<std::int64_t>(s.x_sub.size());
    s.x_sub.push_back(column[i]);
    s.t_sub.push_back(target[i]);
  }
  s.sub.order.clear();
  for (const std::uint32_t row : full.order)
    if (s.compact[row] >= 0) s.sub.order.push_back(static_cast<std::uint32_t>(s.compact[row]));
  prepare_target(s.t_sub, s.sub);
  if (!s.sub.constant) score_values(s.x_sub.data(), s.sub, finite, k, w, s, r);
  return r;
}

}  // namespace

namespace internal {

TargetWanted target_wanted_for(Criterion c, bool test) {
  TargetWanted w;
  w.pearson = c == Criterion::kPearson;
  w.spearman = c == Criterion::kSpearman || (c == Criterion::kMi && test);
  w.mi = c == Criterion::kMi;
  w.p = test;
  return w;
}

TargetScorer::TargetScorer() : buffers_(std::make_unique<Buffers>()) {}
TargetScorer::~TargetScorer() = default;
TargetScorer::TargetScorer(TargetScorer&&) noexcept = default;
TargetScorer& TargetScorer::operator=(TargetScorer&&) noexcept = default;

TargetResult TargetScorer::score(const float* column, std::int64_t n_rows, const TargetPrep& prep,
                                 std::span<const double> target, int k, const ColumnStats* known,
                                 const TargetWanted& wanted) {
  return score_one(column, n_rows, prep, target, k, *buffers_, known, wanted);
}

}  // namespace internal

std::vector<double> average_ranks(std::span<const double> x) {
  const std::vector<std::uint32_t> order = stable_order(x);
  std::vector<double> ranks(x.size());
  for (std::size_t a = 0; a < order.size();) {
    std::size_t b = a;
    while (b + 1 < order.size() && x[order[b + 1]] == x[order[a]]) ++b;
    const double rank = static_cast<double>(a + b) / 2 + 1;
    for (std::size_t i = a; i <= b; ++i) ranks[order[i]] = rank;
    a = b + 1;
  }
  return ranks;
}

double correlation_p(double r, std::int64_t n) {
  if (n < 3 || std::isnan(r)) return 1.0;
  const double a = std::abs(r);
  if (a >= 1) return 0.0;
  // P(|T| >= |t|) with ν = n − 2 df equals I_{ν/(ν+t²)}(ν/2, 1/2), and ν/(ν+t²) = 1 − r².
  const double one_minus_r2 = (1 - a) * (1 + a);
  return boost::math::ibeta(static_cast<double>(n - 2) / 2, 0.5, one_minus_r2, DoublePolicy());
}

double knn_mutual_information_continuous(std::span<const double> x, std::span<const double> y, int k) {
  if (k < 1) throw_usage_error("`neighbors` must be 1 or more");
  if (x.size() != y.size()) throw Error(ErrorKind::kOther, "internal: x and y of equal length expected");
  if (x.size() > 0xFFFFFFFFu) throw Error(ErrorKind::kOther, "internal: more points than the kNN MI can index");
  for (std::size_t i = 0; i < x.size(); ++i)
    if (!std::isfinite(x[i]) || !std::isfinite(y[i]))
      throw Error(ErrorKind::kOther, "internal: the kNN MI needs finite values");
  const auto n = static_cast<std::int64_t>(x.size());
  if (n <= k) return 0;
  TargetPrep t;
  t.order = stable_order(y);
  prepare_target(y, t);
  const auto [lo, hi] = std::minmax_element(x.begin(), x.end());
  if (t.constant || *lo == *hi) return 0;
  // The same arithmetic as score_values, so a float column scored there gets these bits.
  double sum = 0;
  for (const double v : x) sum += v;
  const double mean = sum / static_cast<double>(n);
  double sxx = 0;
  for (const double v : x) sxx += (v - mean) * (v - mean);
  // By ascending x, equal ones in y order.
  KsgData d;
  d.row.assign(t.order.begin(), t.order.end());
  std::stable_sort(d.row.begin(), d.row.end(), [&](std::int64_t a, std::int64_t b) {
    return x[static_cast<std::size_t>(a)] < x[static_cast<std::size_t>(b)];
  });
  arrange_points(x, 1 / std::sqrt(sxx / static_cast<double>(n)), t, d);
  return ksg_estimate(d, k);
}

FeatureScores score_against_target(const ConstMatrixRef& m, std::span<const std::int64_t> features,
                                   std::span<const double> target, const ScoreOptions& options,
                                   std::span<const ColumnStats> stats) {
  if (options.neighbors < 1) throw_usage_error("`neighbors` must be 1 or more");
  if (static_cast<std::int64_t>(target.size()) != m.rows())
    throw Error(ErrorKind::kOther, "internal: one target value per sample expected");
  if (!stats.empty() && stats.size() != features.size())
    throw Error(ErrorKind::kOther, "internal: one ColumnStats per scored feature expected");
  if (m.rows() > std::int64_t{0xFFFFFFFF})
    throw Error(ErrorKind::kOther, "internal: more samples than the target scores can index");
  for (const double v : target)
    if (!std::isfinite(v)) throw Error(ErrorKind::kOther, "internal: the target must be finite on the scored samples");

  TargetPrep full;
  full.order = stable_order(target);
  prepare_target(target, full);

  const std::size_t p = features.size();
  std::vector<internal::TargetResult> results(p);
  std::exception_ptr failure;  // an exception must not leave an OpenMP region
  const int threads = internal::thread_count(options.threads);
  std::vector<internal::TargetScorer> scratch(static_cast<std::size_t>(threads));
  ProgressStep progress("scoring", static_cast<std::int64_t>(p), "features");
  internal::for_each_column(m, features, threads, [&](std::size_t j) {
    progress.add(1);
    try {
      results[j] = scratch[static_cast<std::size_t>(omp_get_thread_num())].score(
          m.col(features[j]).data(), m.rows(), full, target, options.neighbors, stats.empty() ? nullptr : &stats[j]);
    } catch (...) {
#pragma omp critical(pare_target_score_failure)
      if (!failure) failure = std::current_exception();
    }
  });
  if (failure) std::rethrow_exception(failure);

  FeatureScores out;
  out.continuous = true;
  out.feature.assign(features.begin(), features.end());
  auto take = [&](auto member) {
    std::vector<double> v(p);
    for (std::size_t j = 0; j < p; ++j) v[j] = results[j].*member;
    return v;
  };
  out.mi = take(&internal::TargetResult::mi);
  out.pearson_r = take(&internal::TargetResult::pearson_r);
  out.pearson_p = take(&internal::TargetResult::pearson_p);
  out.spearman_rho = take(&internal::TargetResult::spearman_rho);
  out.spearman_p = take(&internal::TargetResult::spearman_p);
  out.variance = take(&internal::TargetResult::variance);
  out.missing_rate = take(&internal::TargetResult::missing_rate);
  out.flags.resize(p);
  out.defined.resize(p);
  for (std::size_t j = 0; j < p; ++j) {
    out.flags[j] = results[j].flags;
    out.defined[j] = results[j].defined;
  }
  out.pearson_q = bh_adjust(out.pearson_p);
  out.spearman_q = bh_adjust(out.spearman_p);
  return out;
}

}  // namespace pare
