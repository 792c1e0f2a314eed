#include "pare/stats.h"

#include <algorithm>  // std::min, std::max
#include <cmath>      // std::isnan
#include <limits>     // std::numeric_limits

#include "internal/omp.h"
#include "internal/spill.h"

namespace pare {

namespace {

template <typename T>
ColumnStats stats_of(std::span<const T> values) {
  ColumnStats s;
  constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
  double sum = 0;
  double lo = std::numeric_limits<double>::infinity();
  double hi = -lo;
  std::int64_t n = 0;
  for (const T v : values) {
    if (std::isnan(v)) continue;
    const auto x = static_cast<double>(v);
    sum += x;
    lo = std::min(lo, x);
    hi = std::max(hi, x);
    ++n;
  }
  s.n = n;
  s.missing = static_cast<std::int64_t>(values.size()) - n;
  if (n == 0) {
    s.mean = s.variance = s.min = s.max = kNaN;
    return s;
  }
  const double mean = sum / static_cast<double>(n);
  double squares = 0, deviations = 0;
  for (const T v : values) {
    if (std::isnan(v)) continue;
    const double d = static_cast<double>(v) - mean;
    squares += d * d;
    deviations += d;
  }
  s.mean = mean;
  s.min = lo;
  s.max = hi;
  if (n < 2) {
    s.variance = kNaN;
  } else {
    const double dn = static_cast<double>(n);
    // Clamp rounding below zero, but keep NaN (an infinite value makes the variance undefined).
    const double v = (squares - deviations * deviations / dn) / (dn - 1);
    s.variance = v < 0 ? 0.0 : v;
  }
  return s;
}

}  // namespace

// Columns per parallel chunk; a matrix on disk gives back each chunk's pages once it is done.
constexpr Eigen::Index kChunk = 64;

ColumnStats column_stats(std::span<const float> values) { return stats_of(values); }
ColumnStats column_stats(std::span<const double> values) { return stats_of(values); }

std::vector<ColumnStats> compute_column_stats(const ConstMatrixRef& m, int threads) {
  std::vector<ColumnStats> out(static_cast<std::size_t>(m.cols()));
  const auto n = static_cast<std::size_t>(m.rows());
  const Eigen::Index chunks = (m.cols() + kChunk - 1) / kChunk;
#pragma omp parallel for schedule(dynamic, 1) num_threads(internal::thread_count(threads))
  for (Eigen::Index c = 0; c < chunks; ++c) {
    const Eigen::Index end = std::min(m.cols(), (c + 1) * kChunk);
    for (Eigen::Index j = c * kChunk; j < end; ++j)
      out[static_cast<std::size_t>(j)] = column_stats(std::span<const float>(m.col(j).data(), n));
    internal::release_column_span(m, c * kChunk, end - 1);
  }
  return out;
}

std::vector<std::int64_t> missing_per_row(const ConstMatrixRef& m, int threads) {
  const Eigen::Index n = m.rows();
  std::vector<std::int64_t> total(static_cast<std::size_t>(n), 0);
#pragma omp parallel num_threads(internal::thread_count(threads))
  {
    // Integer counts: the sum is exact whatever the split between threads.
    std::vector<std::int64_t> local(static_cast<std::size_t>(n), 0);
    const Eigen::Index chunks = (m.cols() + kChunk - 1) / kChunk;
#pragma omp for schedule(dynamic, 1)
    for (Eigen::Index c = 0; c < chunks; ++c) {
      const Eigen::Index end = std::min(m.cols(), (c + 1) * kChunk);
      for (Eigen::Index j = c * kChunk; j < end; ++j) {
        const float* col = m.col(j).data();
        for (Eigen::Index i = 0; i < n; ++i) local[static_cast<std::size_t>(i)] += std::isnan(col[i]);
      }
      internal::release_column_span(m, c * kChunk, end - 1);
    }
#pragma omp critical
    for (Eigen::Index i = 0; i < n; ++i) total[static_cast<std::size_t>(i)] += local[static_cast<std::size_t>(i)];
  }
  return total;
}

}  // namespace pare
