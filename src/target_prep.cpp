// What the target scores need of a continuous target: its centred values, average ranks, sorted
// order and scale (internal/target_scores.h).
#include <algorithm>  // std::stable_sort
#include <cmath>      // std::sqrt
#include <numeric>    // std::iota

#include "internal/target_scores.h"

namespace pare::internal {

void prepare_target(std::span<const double> t, TargetPrep& p) {
  const auto n = static_cast<std::int64_t>(t.size());
  const auto nu = t.size();
  p.n = n;
  p.constant = n == 0 || t[p.order.front()] == t[p.order.back()];
  p.values.assign(t.begin(), t.end());
  double sum = 0;
  for (const double v : t) sum += v;
  const double mean = n > 0 ? sum / static_cast<double>(n) : 0.0;
  p.centred.resize(nu);
  p.ss = 0;
  for (std::size_t i = 0; i < nu; ++i) {
    p.centred[i] = t[i] - mean;
    p.ss += p.centred[i] * p.centred[i];
  }
  p.rank_centred.resize(nu);
  p.rank_ss = 0;
  for (std::size_t a = 0; a < nu;) {
    std::size_t b = a;
    while (b + 1 < nu && t[p.order[b + 1]] == t[p.order[a]]) ++b;
    const double rc = (static_cast<double>(a + b + 1) - static_cast<double>(n)) / 2;
    for (std::size_t i = a; i <= b; ++i) {
      p.rank_centred[p.order[i]] = rc;
      p.rank_ss += rc * rc;
    }
    a = b + 1;
  }
  p.sorted.resize(nu);
  p.run_start.resize(nu);
  std::uint32_t start = 0;
  for (std::size_t i = 0; i < nu; ++i) {
    p.sorted[i] = t[p.order[i]];
    if (i > 0 && p.sorted[i] != p.sorted[i - 1]) start = static_cast<std::uint32_t>(i);
    p.run_start[p.order[i]] = start;
  }
  p.inv_sd = p.constant ? 0.0 : 1 / std::sqrt(p.ss / static_cast<double>(n));
}

std::vector<std::uint32_t> stable_order(std::span<const double> v) {
  std::vector<std::uint32_t> order(v.size());
  std::iota(order.begin(), order.end(), std::uint32_t{0});
  std::stable_sort(order.begin(), order.end(), [&](std::uint32_t a, std::uint32_t b) { return v[a] < v[b]; });
  return order;
}

}  // namespace pare::internal
