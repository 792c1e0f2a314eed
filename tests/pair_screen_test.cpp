// The first look of correlation pruning (src/internal/pair_screen.h): an 8-bit product over a
// subset S of the samples plus Cauchy-Schwarz allowances must bound |r| from above for every pair,
// whatever the data look like, and the VNNI kernel must find exactly the pairs the portable loop
// finds. The reference is |r| computed here in double from the same standardised columns.
#include "internal/pair_screen.h"

#include <algorithm>  // std::max
#include <cmath>      // std::abs, std::sqrt, std::exp
#include <cstdint>    // std::int32_t
#include <random>     // std::mt19937_64
#include <vector>     // std::vector

#include <catch2/catch.hpp>

namespace {

using pare::internal::PairCodeBlock;
using pare::internal::PairCodeKept;
using pare::internal::PairCodeSurvivors;

// Columns of n samples in several shapes: Gaussian, heavy-tailed (log-normal, sd 2 on the log
// scale), integer counts with many ties, mostly zero with a few large values, one huge outlier,
// and members of groups sharing a factor with |r| from about 0.3 to 0.999.
std::vector<std::vector<double>> columns(Eigen::Index n, int count, std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> normal(0.0, 1.0);
  std::vector<std::vector<double>> out;
  std::vector<double> factor(static_cast<std::size_t>(n));
  for (auto& f : factor) f = normal(rng);
  const double noise[] = {0.03, 0.1, 0.3, 0.33, 0.35, 1.0, 1.5};
  for (int j = 0; j < count; ++j) {
    std::vector<double> x(static_cast<std::size_t>(n));
    for (Eigen::Index i = 0; i < n; ++i) {
      const double z = normal(rng);
      auto& v = x[static_cast<std::size_t>(i)];
      switch (j % 6) {
        case 0: v = z; break;
        case 1: v = std::exp(2 * z); break;
        case 2: v = std::floor(3 * std::abs(z)); break;
        case 3: v = rng() % 10 == 0 ? 100 * std::abs(z) : 0; break;
        case 4: v = i == 7 ? 1e4 : z; break;
        default: v = factor[static_cast<std::size_t>(i)] + noise[j % 7] * z;
      }
    }
    x[0] += 1;  // never constant
    out.push_back(x);
  }
  return out;
}

struct Standardised {
  std::vector<std::vector<float>> z;  // float columns as pruning stores them
  std::vector<std::vector<double>> zd;  // the same floats in double
};

Standardised standardise(const std::vector<std::vector<double>>& cols) {
  Standardised s;
  for (const auto& x : cols) {
    double mean = 0;
    for (double v : x) mean += v;
    mean /= static_cast<double>(x.size());
    double ss = 0;
    for (double v : x) ss += (v - mean) * (v - mean);
    std::vector<float> z;
    std::vector<double> zd;
    for (double v : x) {
      z.push_back(static_cast<float>((v - mean) / std::sqrt(ss)));
      zd.push_back(z.back());
    }
    s.z.push_back(z);
    s.zd.push_back(zd);
  }
  return s;
}

double rest_norm(const std::vector<double>& z, Eigen::Index m) {  // |z| over rows m..n
  double s = 0;
  for (std::size_t i = static_cast<std::size_t>(m); i < z.size(); ++i) s += z[i] * z[i];
  return std::sqrt(s);
}

}  // namespace

TEST_CASE("8-bit pair bound: the 8-bit bound is never below |r|, and the kernels agree", "[prune]") {
  const Eigen::Index n = 300, m = 61;  // S = the first m rows, rounded up to 64 codes
  const int count = 84;
  const Standardised s = standardise(columns(n, count, 11));
  PairCodeBlock block;
  block.reset(m, count);
  for (int b = 0; b < count; ++b) block.set(b, s.z[static_cast<std::size_t>(b)].data(), rest_norm(s.zd[static_cast<std::size_t>(b)], m));
  PairCodeKept kept(block.padded());
  for (int b = 0; b < count; ++b) kept.append(block, b);
  REQUIRE(kept.size() == count);

  double tightest = 1e9, loosest = 0;
  for (int k = 0; k < count; ++k)
    for (int b = 0; b < count; ++b) {
      double r = 0;
      for (Eigen::Index i = 0; i < n; ++i) r += s.zd[static_cast<std::size_t>(k)][static_cast<std::size_t>(i)] * s.zd[static_cast<std::size_t>(b)][static_cast<std::size_t>(i)];
      const double bound = pare::internal::pair_code_bound(kept, k, block, b);
      INFO("kept " << k << ", candidate " << b << ", |r| " << std::abs(r) << ", bound " << bound);
      REQUIRE(bound >= std::abs(r) - 1e-6);
      tightest = std::min(tightest, bound - std::abs(r));
      loosest = std::max(loosest, bound - std::abs(r));
    }
  // The 8-bit allowance is small next to the Cauchy-Schwarz term on the rest: a bound is never
  // more than 1 above |r| (|a_R| |b_R| <= 1) plus a little.
  REQUIRE(tightest >= -1e-6);
  REQUIRE(loosest <= 1.05);

  // Every cut: the survivors are exactly the pairs whose bound reaches it (up to the last float
  // roundings), the same with the VNNI kernel (where the processor has it) and the portable loop.
  for (float cut : {0.3f, 0.6f, 0.8f, 0.9f, 0.95f}) {
    std::vector<std::int64_t> found[2];  // candidate * 1000 + kept
    std::vector<float> products[2];
    for (int path = 0; path < 2; ++path) {
      pare::internal::pair_code_allow_vnni(path == 0);
      for (Eigen::Index first = 0; first < count; first += pare::internal::kPairCodeTile) {
        const int width = static_cast<int>(std::min<Eigen::Index>(pare::internal::kPairCodeTile, count - first));
        PairCodeSurvivors tile;
        // In two chunks of groups, as pruning calls it.
        pare::internal::pair_code_find(kept, block, cut, first, width, 0, 3, tile);
        pare::internal::pair_code_find(kept, block, cut, first, width, 3, kept.groups(), tile);
        for (int c = 0; c < width; ++c)
          for (const auto& hit : tile[static_cast<std::size_t>(c)]) {
            found[path].push_back((first + c) * 1000 + hit.k);
            products[path].push_back(hit.product);
          }
      }
    }
    pare::internal::pair_code_allow_vnni(true);
    INFO("cut " << cut << (pare::internal::pair_code_uses_vnni() ? " (VNNI kernel)" : " (portable loop only)"));
    REQUIRE(found[0] == found[1]);
    REQUIRE(products[0] == products[1]);
    std::size_t expected = 0, at = 0;
    for (int b = 0; b < count; ++b)
      for (int k = 0; k < count; ++k) {
        const float bound = pare::internal::pair_code_bound(kept, k, block, b);
        const bool listed = at < found[1].size() && found[1][at] == b * 1000 + k;
        if (listed) ++at;
        if (std::abs(bound - cut) < 1e-5f) continue;  // too close to call from outside
        REQUIRE(listed == (bound >= cut));
        expected += bound >= cut;
      }
    REQUIRE(at == found[1].size());
    REQUIRE(expected > 0);
  }
}

TEST_CASE("8-bit pair bound: the second look's bound over S and S2 is never below |r|", "[prune]") {
  const Eigen::Index n = 400, m = 57, m2 = 70;  // S: rows 0..56, S2: rows 57..126
  const int count = 60;
  const Standardised s = standardise(columns(n, count, 29));
  PairCodeBlock block;
  block.reset(m, count, m2);
  for (int b = 0; b < count; ++b) {
    const auto& z = s.zd[static_cast<std::size_t>(b)];
    block.set(b, s.z[static_cast<std::size_t>(b)].data(), rest_norm(z, m), rest_norm(z, m + m2));
  }
  PairCodeKept kept(block.padded());
  for (int b = 0; b < count; ++b) kept.append(block, b);
  std::int64_t pairs = 0, tighter = 0;
  for (Eigen::Index first = 0; first < count; first += pare::internal::kPairCodeTile) {
    const int width = static_cast<int>(std::min<Eigen::Index>(pare::internal::kPairCodeTile, count - first));
    PairCodeSurvivors tile;
    pare::internal::pair_code_find(kept, block, -1.0f, first, width, 0, kept.groups(), tile);  // every pair
    for (int c = 0; c < width; ++c) {
      const Eigen::Index b = first + c;
      REQUIRE(tile[static_cast<std::size_t>(c)].size() == static_cast<std::size_t>(count));
      for (const auto& hit : tile[static_cast<std::size_t>(c)]) {
        double r = 0;
        for (Eigen::Index i = 0; i < n; ++i) r += s.zd[static_cast<std::size_t>(hit.k)][static_cast<std::size_t>(i)] * s.zd[static_cast<std::size_t>(b)][static_cast<std::size_t>(i)];
        const float first_bound = pare::internal::pair_code_bound(kept, hit.k, block, b);
        const float second = pare::internal::pair_code_second_bound(kept, block, b, hit);
        INFO("kept " << hit.k << ", candidate " << b << ", |r| " << std::abs(r) << ", bounds " << first_bound << ", " << second);
        REQUIRE(second >= std::abs(r) - 1e-6);
        ++pairs;
        tighter += second < first_bound;
      }
    }
  }
  REQUIRE(pairs == count * count);
  // Looking at more rows tightens the bound for most pairs.
  REQUIRE(tighter > pairs / 2);
}

TEST_CASE("8-bit pair bound: constant and all-zero subsets code to zero with zero allowances", "[prune]") {
  const Eigen::Index m = 13;
  std::vector<float> zero(static_cast<std::size_t>(m), 0.0f);
  std::vector<std::int8_t> q(16, 5);
  const auto norms = pare::internal::pair_code_subset(zero.data(), m, 16, 0.5, q.data());
  REQUIRE(norms.scale == 0.0f);
  REQUIRE(norms.coded == 0.0f);
  REQUIRE(norms.error == 0.0f);
  REQUIRE(norms.sum == 0);
  REQUIRE(norms.rest >= 0.5f);
  for (auto v : q) REQUIRE(v == 0);

  // The largest value codes to exactly 127 and the error norm is what is left over.
  std::vector<float> z{0.5f, -0.3f, 0.1f, 0.0f};
  std::vector<std::int8_t> c(4);
  const auto n4 = pare::internal::pair_code_subset(z.data(), 4, 4, 0.0, c.data());
  REQUIRE(c[0] == 127);
  REQUIRE(c[1] == -76);  // -0.3 / (0.5 / 127) = -76.2
  REQUIRE(c[2] == 25);   // 25.4
  REQUIRE(c[3] == 0);
  double error = 0;
  for (int i = 0; i < 4; ++i) {
    const double d = static_cast<double>(z[static_cast<std::size_t>(i)]) - static_cast<double>(n4.scale) * c[static_cast<std::size_t>(i)];
    error += d * d;
  }
  REQUIRE(n4.error >= std::sqrt(error));
  REQUIRE(n4.error <= std::sqrt(error) * 1.00001 + 1e-12);
}
