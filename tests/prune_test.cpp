// Correlation pruning (SPEC §4 step 6) against a brute-force reference written here: Pearson r of
// every compared pair in double precision on the same float32 columns, and the sequential walk in
// the given rank order (a candidate is dropped when |r| with any already kept candidate exceeds
// max_corr; the walk stops once max_kept are kept). pare computes the products in float32 blocks
// and decides pairs near the threshold in double; its decisions must be those of the walk.
#include "pare/prune.h"

#include <algorithm>  // std::stable_sort, std::max
#include <cmath>      // std::abs, std::sqrt, std::nextafter
#include <cstdint>    // std::int64_t
#include <limits>     // std::numeric_limits
#include <numeric>    // std::iota
#include <random>     // std::mt19937_64, std::normal_distribution
#include <string>     // std::string
#include <vector>     // std::vector

#include <catch2/catch.hpp>

#include "internal/pair_screen.h"
#include "pare/error.h"
#include "pare/matrix.h"

namespace {

using pare::Matrix;
using pare::PruneOptions;
using pare::PruneResult;

// ---- the reference ----------------------------------------------------------------------------

// Pearson r of columns a and b of m in double: mean, then the centred cross product over the
// square roots of the centred sums of squares. 0 when either column is constant (its centred sum
// of squares is exactly 0, as n equal floats sum exactly in double).
double pearson(const Matrix& m, Eigen::Index a, Eigen::Index b) {
  const Eigen::Index n = m.rows();
  double sa = 0, sb = 0;
  for (Eigen::Index i = 0; i < n; ++i) {
    sa += static_cast<double>(m(i, a));
    sb += static_cast<double>(m(i, b));
  }
  const double ma = sa / static_cast<double>(n), mb = sb / static_cast<double>(n);
  double saa = 0, sbb = 0, sab = 0;
  for (Eigen::Index i = 0; i < n; ++i) {
    const double da = static_cast<double>(m(i, a)) - ma, db = static_cast<double>(m(i, b)) - mb;
    saa += da * da;
    sbb += db * db;
    sab += da * db;
  }
  if (saa == 0 || sbb == 0) return 0;
  // |r| <= 1 by definition (Cauchy-Schwarz); rounding can give an exact copy 1 + 2^-52.
  return std::clamp(sab / (std::sqrt(saa) * std::sqrt(sbb)), -1.0, 1.0);
}

// Standardised double copies of the columns (z . z = r), for the large brute-force case.
std::vector<std::vector<double>> standardised(const Matrix& m) {
  const Eigen::Index n = m.rows();
  std::vector<std::vector<double>> z(static_cast<std::size_t>(m.cols()), std::vector<double>(n));
  for (Eigen::Index j = 0; j < m.cols(); ++j) {
    double s = 0;
    for (Eigen::Index i = 0; i < n; ++i) s += static_cast<double>(m(i, j));
    const double mean = s / static_cast<double>(n);
    double ss = 0;
    for (Eigen::Index i = 0; i < n; ++i) ss += (m(i, j) - mean) * (m(i, j) - mean);
    const double scale = ss > 0 ? 1 / std::sqrt(ss) : 0;
    for (Eigen::Index i = 0; i < n; ++i)
      z[static_cast<std::size_t>(j)][static_cast<std::size_t>(i)] = (m(i, j) - mean) * scale;
  }
  return z;
}

// z_a . z_b, clamped to [-1, 1] like pearson().
double dot_r(const std::vector<double>& x, const std::vector<double>& y) {
  double s = 0;
  for (std::size_t i = 0; i < x.size(); ++i) s += x[i] * y[i];
  return std::clamp(s, -1.0, 1.0);
}

struct Reference {
  std::vector<char> kept;
  std::vector<double> best_r;  // dropped: the r of largest |r| among kept partners
  std::vector<std::vector<std::int64_t>> partners;  // dropped: every kept position above max_corr
  std::vector<std::vector<double>> partner_r;       // ... and its r
  std::int64_t examined = 0;
  double closest = std::numeric_limits<double>::infinity();  // min | |r| - max_corr | compared
};

// The sequential walk. `r(a, b)` gives the double r of candidate positions a and b.
template <typename R>
Reference walk(std::int64_t count, double max_corr, std::int64_t max_kept, R r) {
  Reference ref;
  ref.kept.assign(static_cast<std::size_t>(count), 0);
  ref.best_r.assign(static_cast<std::size_t>(count), 0);
  ref.partners.resize(static_cast<std::size_t>(count));
  ref.partner_r.resize(static_cast<std::size_t>(count));
  std::vector<std::int64_t> kept;
  for (std::int64_t c = 0; c < count; ++c) {
    if (max_kept > 0 && static_cast<std::int64_t>(kept.size()) >= max_kept) break;
    ref.examined = c + 1;
    const auto ci = static_cast<std::size_t>(c);
    for (const std::int64_t k : kept) {
      const double v = r(k, c);
      ref.closest = std::min(ref.closest, std::abs(std::abs(v) - max_corr));
      if (std::abs(v) > max_corr) {
        ref.partners[ci].push_back(k);
        ref.partner_r[ci].push_back(v);
        if (std::abs(v) > std::abs(ref.best_r[ci])) ref.best_r[ci] = v;
      }
    }
    if (ref.partners[ci].empty()) {
      ref.kept[ci] = 1;
      kept.push_back(c);
    }
  }
  return ref;
}

// Compares pare's result with the reference walk: identical kept flags and examined count; a
// dropped candidate names a kept candidate (earlier in the order) whose |r| is above max_corr, and
// result.r is the double r with it. pare names the kept feature of largest |r| among those it
// compares a candidate with first (earlier blocks' survivors before the block's own), so the
// partner may differ from the reference's largest |r|; `largest` additionally requires the largest
// |r| to within `tie` (float32 products may swap two kept partners whose |r| differ by less).
void require_matches(const PruneResult& got, const Reference& ref, double tie,
                     bool largest = false) {
  const auto count = ref.kept.size();
  REQUIRE(got.kept.size() == count);
  REQUIRE(got.partner.size() == count);
  REQUIRE(got.r.size() == count);
  REQUIRE(got.examined == ref.examined);
  std::int64_t mismatches = 0;
  for (std::size_t c = 0; c < count; ++c) mismatches += got.kept[c] != ref.kept[c];
  INFO(mismatches << " kept flags differ from the reference walk");
  REQUIRE(mismatches == 0);
  for (std::size_t c = 0; c < count; ++c) {
    INFO("candidate position " << c);
    const bool examined = static_cast<std::int64_t>(c) < ref.examined;
    if (ref.kept[c] || !examined) {
      REQUIRE(got.partner[c] == -1);
      REQUIRE(got.r[c] == 0.0);
      continue;
    }
    const auto& ps = ref.partners[c];
    const auto it = std::find(ps.begin(), ps.end(), got.partner[c]);
    INFO("partner " << got.partner[c] << ", r " << got.r[c] << ", reference best r "
                    << ref.best_r[c]);
    REQUIRE(it != ps.end());
    const double exact = ref.partner_r[c][static_cast<std::size_t>(it - ps.begin())];
    // Both are the same double formula on the same floats; only summation details differ
    // (about 1e-16 relative), so 1e-12 is a wide margin.
    REQUIRE(std::abs(got.r[c] - exact) <= 1e-12);
    if (largest) REQUIRE(std::abs(exact) >= std::abs(ref.best_r[c]) - tie);
  }
}

// ---- data ---------------------------------------------------------------------------------------

// Seeded n x p data with planted groups: each group has a hidden factor, and each member is
// factor * loading + noise * s with s spread so that within-group |r| lands on both sides of 0.5,
// 0.9 and 0.99 (|r| is about 1 / (1 + s^2) for two members). Members get random signs, scales and
// offsets; a few columns are constant and a few are exact copies of another column.
Matrix planted(Eigen::Index n, Eigen::Index p, std::uint64_t seed,
               std::vector<Eigen::Index>* constant = nullptr) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> normal(0.0, 1.0);
  std::uniform_real_distribution<double> uniform(0.0, 1.0);
  const double noise_levels[] = {0.03, 0.08, 0.12, 0.3, 0.45, 0.8, 1.0, 1.5};
  Matrix m(n, p);
  std::vector<double> factor(static_cast<std::size_t>(n));
  Eigen::Index j = 0;
  while (j < p) {
    const auto size = static_cast<Eigen::Index>(1 + rng() % 6);
    for (auto& f : factor) f = normal(rng);
    for (Eigen::Index g = 0; g < size && j < p; ++g, ++j) {
      const double s = noise_levels[rng() % 8];
      const double sign = rng() % 2 ? 1.0 : -1.0;
      const double scale = 0.01 + 100 * uniform(rng);
      const double offset = 10 * normal(rng);
      for (Eigen::Index i = 0; i < n; ++i)
        m(i, j) = static_cast<float>(
            offset + scale * sign * (factor[static_cast<std::size_t>(i)] + s * normal(rng)));
    }
  }
  // Constant columns (several values, one of them 0) and exact copies of earlier columns.
  for (Eigen::Index c = 0; c < p / 17 + 1; ++c) {
    const Eigen::Index at = static_cast<Eigen::Index>(rng() % static_cast<std::uint64_t>(p));
    m.col(at).setConstant(c % 3 == 0 ? 0.0f : static_cast<float>(3.7 * static_cast<double>(c)));
    if (constant) constant->push_back(at);
  }
  for (Eigen::Index c = 0; c < p / 23 + 1; ++c) {
    const Eigen::Index from = static_cast<Eigen::Index>(rng() % static_cast<std::uint64_t>(p));
    const Eigen::Index to = static_cast<Eigen::Index>(rng() % static_cast<std::uint64_t>(p));
    if (constant && (std::find(constant->begin(), constant->end(), to) != constant->end() ||
                     std::find(constant->begin(), constant->end(), from) != constant->end()))
      continue;
    m.col(to) = m.col(from);
  }
  return m;
}

// A rank order with ties: candidates are `percent`% of the columns (a subset), scored with small
// integers (many ties) and stable-sorted by score, descending, after a seeded shuffle: the order
// given is the tie-break.
std::vector<std::int64_t> rank_order_with_ties(Eigen::Index p, std::uint64_t seed,
                                               unsigned percent = 85) {
  std::mt19937_64 rng(seed);
  std::vector<std::int64_t> order;
  for (Eigen::Index j = 0; j < p; ++j)
    if (rng() % 100 < percent) order.push_back(j);
  std::shuffle(order.begin(), order.end(), rng);
  std::vector<int> score(static_cast<std::size_t>(p));
  for (auto& s : score) s = static_cast<int>(rng() % 4);
  std::stable_sort(order.begin(), order.end(), [&](std::int64_t a, std::int64_t b) {
    return score[static_cast<std::size_t>(a)] > score[static_cast<std::size_t>(b)];
  });
  return order;
}

Reference reference_walk(const Matrix& m, const std::vector<std::int64_t>& cand, double max_corr,
                         std::int64_t max_kept) {
  return walk(static_cast<std::int64_t>(cand.size()), max_corr, max_kept,
              [&](std::int64_t a, std::int64_t b) {
                return pearson(m, cand[static_cast<std::size_t>(a)],
                               cand[static_cast<std::size_t>(b)]);
              });
}

PruneResult prune(const Matrix& m, const std::vector<std::int64_t>& cand, double max_corr,
                  std::int64_t max_kept, std::int64_t block, int threads) {
  PruneOptions o;
  o.max_corr = max_corr;
  o.max_kept = max_kept;
  o.block = block;
  o.threads = threads;
  return pare::prune_correlated(m, cand, o);
}

void require_identical(const PruneResult& a, const PruneResult& b) {
  REQUIRE(a.kept == b.kept);
  REQUIRE(a.partner == b.partner);
  REQUIRE(a.r == b.r);  // bit for bit
  REQUIRE(a.examined == b.examined);
}

// The float32 tie margin for naming a partner: n * 2^-24 bounds the float dot product error of two
// unit vectors (pare's own bound), doubled for the two values being compared.
double tie_margin(Eigen::Index n) {
  return 1e-6 + 4.0 * static_cast<double>(n) * 5.97e-8;
}

}  // namespace

TEST_CASE("prune: the sequential walk on planted groups, several shapes, blocks and thresholds",
          "[prune]") {
  struct Shape {
    Eigen::Index n, p;
  };
  // n < p (wide), n > p (tall), and n close to p; from 64 samples on, the subset bound is used.
  const Shape shapes[] = {{12, 90}, {40, 300}, {150, 60}, {300, 25}, {33, 33}, {120, 700}};
  std::uint64_t seed = 11;
  for (const Shape s : shapes) {
    const Matrix m = planted(s.n, s.p, seed);
    const std::vector<std::int64_t> cand = rank_order_with_ties(s.p, seed + 1000);
    ++seed;
    for (const double max_corr : {0.5, 0.9, 0.99}) {
      for (const std::int64_t max_kept : {std::int64_t{0}, std::int64_t{7}}) {
        const Reference ref = reference_walk(m, cand, max_corr, max_kept);
        INFO("n " << s.n << ", p " << s.p << ", max_corr " << max_corr << ", max_kept " << max_kept
                  << ", closest |r| to the threshold " << ref.closest);
        // The data must not sit on the threshold, or double rounding could decide either way.
        REQUIRE(ref.closest > 1e-9);
        std::int64_t dropped = 0;
        for (std::size_t c = 0; c < cand.size(); ++c)
          dropped += !ref.kept[c] && static_cast<std::int64_t>(c) < ref.examined;
        if (max_kept == 0) REQUIRE(dropped > 0);  // the planted groups do make drops
        if (max_kept > 0) {
          std::int64_t kept = 0;
          for (const char k : ref.kept) kept += k;
          REQUIRE(kept == max_kept);
        }
        for (const std::int64_t block : {1, 3, 512}) {
          INFO("block " << block);
          const PruneResult one = prune(m, cand, max_corr, max_kept, block, 1);
          // One candidate per block, or all in one block: every kept one is compared at once.
          const bool largest = block == 1 || static_cast<std::int64_t>(cand.size()) <= block;
          require_matches(one, ref, tie_margin(s.n), largest);
          // Threads 1 vs 2 with the block size the pipeline uses (small blocks with 2 threads
          // spend their time in thread start-up, slow on a loaded machine; block 3 is compared
          // across threads in the max_kept case below).
          if (block == 512) {
            const PruneResult two = prune(m, cand, max_corr, max_kept, block, 2);
            require_identical(one, two);
            // The first look's portable loop, as on a processor without AVX-512 VNNI.
            pare::internal::pair_code_allow_vnni(false);
            const PruneResult portable = prune(m, cand, max_corr, max_kept, block, 2);
            pare::internal::pair_code_allow_vnni(true);
            require_identical(one, portable);
          }
        }
      }
    }
  }
}

TEST_CASE("prune: ties in the rank order are broken by the order given", "[prune]") {
  // Columns 0 and 1 are exact copies, column 2 a noisy copy (|r| about 0.99 with them), 3
  // unrelated.
  std::mt19937_64 rng(5);
  std::normal_distribution<double> normal(0.0, 1.0);
  const Eigen::Index n = 30;
  Matrix m(n, 4);
  for (Eigen::Index i = 0; i < n; ++i) {
    const double f = normal(rng);
    m(i, 0) = m(i, 1) = static_cast<float>(f);
    m(i, 2) = static_cast<float>(f + 0.1 * normal(rng));
    m(i, 3) = static_cast<float>(normal(rng));
  }
  for (const std::vector<std::int64_t>& order :
       {std::vector<std::int64_t>{0, 1, 2, 3}, {1, 0, 2, 3}, {2, 1, 0, 3}, {3, 1, 2, 0}}) {
    const PruneResult got = prune(m, order, 0.9, 0, 512, 2);
    INFO("order " << order[0] << order[1] << order[2] << order[3]);
    // The first of the three copies in the order is kept, the others name it.
    std::size_t first = 0;
    while (order[first] == 3) ++first;
    for (std::size_t c = 0; c < 4; ++c) {
      const bool expect_kept = order[c] == 3 || c == first;
      REQUIRE(static_cast<bool>(got.kept[c]) == expect_kept);
      if (!expect_kept) {
        REQUIRE(got.partner[c] == static_cast<std::int64_t>(first));
        REQUIRE(std::abs(got.r[c] - pearson(m, order[first], order[c])) <= 1e-12);
      }
    }
    require_matches(got, reference_walk(m, order, 0.9, 0), tie_margin(n));
  }
}

TEST_CASE("prune: constant columns never drop anything and are never dropped", "[prune]") {
  const Eigen::Index n = 25;
  std::vector<Eigen::Index> constant;
  Matrix m = planted(n, 80, 77, &constant);
  // Also a column of 0.1f: not exactly representable, still exactly constant in double.
  m.col(79).setConstant(0.1f);
  constant.push_back(79);
  std::vector<std::int64_t> cand(80);
  std::iota(cand.begin(), cand.end(), 0);
  // Constant columns first in the order: they must not knock out anything after them.
  std::stable_sort(cand.begin(), cand.end(), [&](std::int64_t a, std::int64_t b) {
    const bool ca = std::find(constant.begin(), constant.end(), a) != constant.end();
    const bool cb = std::find(constant.begin(), constant.end(), b) != constant.end();
    return ca && !cb;
  });
  // max_corr 0: every non-constant pair with any correlation is a drop, so only the first
  // non-constant candidate and the constant ones survive.
  for (const double max_corr : {0.0, 0.5, 0.9}) {
    for (const std::int64_t block : {1, 512}) {
      INFO("max_corr " << max_corr << ", block " << block);
      const PruneResult got = prune(m, cand, max_corr, 0, block, block == 1 ? 1 : 2);
      const Reference ref = reference_walk(m, cand, max_corr, 0);
      require_matches(got, ref, tie_margin(n), true);
      for (std::size_t c = 0; c < cand.size(); ++c) {
        const bool is_constant =
            std::find(constant.begin(), constant.end(), cand[c]) != constant.end();
        if (is_constant) REQUIRE(got.kept[c] == 1);
        if (got.partner[c] >= 0) {
          const std::int64_t partner_column = cand[static_cast<std::size_t>(got.partner[c])];
          REQUIRE(std::find(constant.begin(), constant.end(), partner_column) == constant.end());
        }
      }
      if (max_corr == 0.0) {
        std::int64_t kept = 0;
        for (const char k : got.kept) kept += k;
        std::int64_t distinct_constant = 0;
        for (std::size_t c = 0; c < cand.size(); ++c)
          distinct_constant +=
              std::find(constant.begin(), constant.end(), cand[c]) != constant.end();
        REQUIRE(kept == distinct_constant + 1);
      }
    }
  }
}

TEST_CASE("prune: pairs within the float32 margin of the threshold are decided in double",
          "[prune]") {
  // Pairs with |r| in 0.9 +- 1e-4 (inside float32 noise of the blocked product for the larger
  // n), with the threshold placed 1e-9 below and above the exact double |r| of one pair.
  std::mt19937_64 rng(21);
  std::normal_distribution<double> normal(0.0, 1.0);
  for (const Eigen::Index n : {Eigen::Index{20}, Eigen::Index{400}}) {
    const Eigen::Index p = 10;
    Matrix m(n, p);
    std::vector<double> f(static_cast<std::size_t>(n));
    for (auto& v : f) v = normal(rng);
    for (Eigen::Index j = 0; j < p; ++j) {
      std::vector<double> e(static_cast<std::size_t>(n));
      for (auto& v : e) v = normal(rng);
      // r about 1/sqrt(1 + s^2) with the factor; adjacent members near 0.9 with each other.
      const double s = 0.35 + 0.01 * static_cast<double>(j);
      for (Eigen::Index i = 0; i < n; ++i)
        m(i, j) = static_cast<float>(5 + f[static_cast<std::size_t>(i)] +
                                     s * e[static_cast<std::size_t>(i)]);
    }
    std::vector<std::int64_t> cand(static_cast<std::size_t>(p));
    std::iota(cand.begin(), cand.end(), 0);
    for (Eigen::Index b = 1; b < p; ++b) {
      const double r0 = std::abs(pearson(m, 0, b));
      // Only candidates 0 and b: b is dropped exactly when the threshold is below |r|.
      const std::vector<std::int64_t> pair{0, b};
      for (const double delta : {-1e-9, 1e-9}) {
        const double max_corr = r0 + delta;
        if (max_corr > 1) continue;
        for (const std::int64_t block : {1, 512}) {
          INFO("n " << n << ", column " << b << ", |r| " << r0 << ", threshold |r| "
                    << (delta < 0 ? "-" : "+") << " 1e-9, block " << block);
          const PruneResult got = prune(m, pair, max_corr, 0, block, 1);
          REQUIRE(got.kept[0] == 1);
          REQUIRE(static_cast<bool>(got.kept[1]) == (delta > 0));
          if (delta < 0) {
            REQUIRE(got.partner[1] == 0);
            REQUIRE(std::abs(got.r[1] - pearson(m, 0, b)) <= 1e-12);
          }
        }
      }
    }
    // The whole set at a threshold 1e-9 above one pair's |r|, against the reference walk.
    const double max_corr = std::abs(pearson(m, 0, 1)) + 1e-9;
    const Reference ref = reference_walk(m, cand, max_corr, 0);
    INFO("n " << n << ", closest " << ref.closest);
    REQUIRE(ref.closest > 1e-10);
    for (const std::int64_t block : {1, 3, 512}) {
      const PruneResult got = prune(m, cand, max_corr, 0, block, block == 1 ? 1 : 2);
      require_matches(got, ref, tie_margin(n));
    }
  }
}

TEST_CASE("prune: max_corr 1 keeps exact copies, 0.99 drops them", "[prune]") {
  // |r| <= 1 always, so nothing is "above 1"; an exact copy's double r can round to 1 + 2^-52,
  // which must not decide. 100 pairs of exact copies on n = 37 (several round above 1).
  std::mt19937_64 rng(1);
  std::normal_distribution<double> normal(0.0, 1.0);
  const Eigen::Index n = 37, p = 200;
  Matrix m(n, p);
  for (Eigen::Index j = 0; j < p; j += 2)
    for (Eigen::Index i = 0; i < n; ++i)
      m(i, j) = m(i, j + 1) = static_cast<float>(3 + 1.7 * normal(rng));
  std::vector<std::int64_t> cand(static_cast<std::size_t>(p));
  std::iota(cand.begin(), cand.end(), 0);
  for (const std::int64_t block : {1, 512}) {
    INFO("block " << block);
    const PruneResult one = prune(m, cand, 1.0, 0, block, block == 1 ? 1 : 2);
    for (const char k : one.kept) REQUIRE(k == 1);
    const PruneResult near = prune(m, cand, 0.99, 0, block, block == 1 ? 1 : 2);
    for (Eigen::Index j = 0; j < p; ++j) {
      REQUIRE(static_cast<bool>(near.kept[static_cast<std::size_t>(j)]) == (j % 2 == 0));
      if (j % 2 == 1) {
        REQUIRE(near.partner[static_cast<std::size_t>(j)] == j - 1);
        REQUIRE(near.r[static_cast<std::size_t>(j)] <= 1.0);
        REQUIRE(near.r[static_cast<std::size_t>(j)] >= 1.0 - 1e-12);  // an exact copy
      }
    }
  }
}

TEST_CASE("prune: max_kept stops the walk after the K-th kept candidate", "[prune]") {
  const Matrix m = planted(30, 200, 91);
  const std::vector<std::int64_t> cand = rank_order_with_ties(200, 92);
  for (const std::int64_t max_kept : {1, 2, 3, 50, 1000}) {
    const Reference ref = reference_walk(m, cand, 0.9, max_kept);
    std::int64_t kept = 0;
    for (const char k : ref.kept) kept += k;
    for (const std::int64_t block : {1, 3, 512}) {
      INFO("max_kept " << max_kept << ", block " << block);
      const PruneResult got = prune(m, cand, 0.9, max_kept, block, 1);
      require_matches(got, ref, tie_margin(30), block == 1);
      require_identical(got, prune(m, cand, 0.9, max_kept, block, 2));
      // The walk stops right after the K-th kept candidate: the last examined one is kept.
      if (max_kept < static_cast<std::int64_t>(cand.size()) && kept == max_kept)
        REQUIRE(got.kept[static_cast<std::size_t>(got.examined - 1)] == 1);
      if (max_kept == 1000) REQUIRE(got.examined == static_cast<std::int64_t>(cand.size()));
    }
  }
}

TEST_CASE("prune: empty input and bad thresholds", "[prune]") {
  const Matrix m = planted(10, 5, 3);
  const PruneResult none = prune(m, {}, 0.9, 0, 512, 2);
  REQUIRE(none.kept.empty());
  REQUIRE(none.examined == 0);
  for (const double bad : {-0.1, 1.5, std::numeric_limits<double>::quiet_NaN()}) {
    INFO("max_corr " << bad);
    try {
      prune(m, {0, 1}, bad, 0, 512, 1);
      FAIL("no error");
    } catch (const pare::Error& e) {
      REQUIRE(e.kind() == pare::ErrorKind::kUsage);
    }
  }
}

TEST_CASE("prune: 5,000 candidates on 60 samples against brute force", "[prune]") {
  const Eigen::Index n = 60, p = 5000;
  const Matrix m = planted(n, p, 2024);
  const std::vector<std::int64_t> cand = rank_order_with_ties(p, 2025, 100);  // all 5,000
  const auto z = standardised(m);
  const auto dot = [&](std::int64_t a, std::int64_t b) {
    const auto& x = z[static_cast<std::size_t>(cand[static_cast<std::size_t>(a)])];
    const auto& y = z[static_cast<std::size_t>(cand[static_cast<std::size_t>(b)])];
    return dot_r(x, y);
  };
  for (const auto& [max_corr, max_kept] :
       {std::pair{0.9, std::int64_t{0}}, std::pair{0.5, std::int64_t{1500}}}) {
    const Reference ref = walk(static_cast<std::int64_t>(cand.size()), max_corr, max_kept, dot);
    std::int64_t kept = 0;
    for (const char k : ref.kept) kept += k;
    INFO("max_corr " << max_corr << ", max_kept " << max_kept << ": reference keeps " << kept
                     << " of " << cand.size() << " (examined " << ref.examined << "), closest "
                     << ref.closest);
    REQUIRE(ref.closest > 1e-9);
    const PruneResult two = prune(m, cand, max_corr, max_kept, 512, 2);
    require_matches(two, ref, tie_margin(n));
    const PruneResult one = prune(m, cand, max_corr, max_kept, 512, 1);
    require_identical(one, two);
  }
}
