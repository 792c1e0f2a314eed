#include "pare/stats.h"

#include <algorithm>  // std::min, std::max
#include <cmath>      // std::isnan
#include <limits>     // std::numeric_limits

#include "internal/omp.h"
#include "internal/spill.h"

namespace pare {

namespace {

// Sums in kLanes interleaved partial sums (value i goes to lane i % kLanes), combined in a fixed
// order at the end: the compiler can then keep them in vector registers (one running sum would
// serialise every addition), and the result still does not depend on anything but the values.
constexpr int kLanes = 8;

double combine(const double (&lane)[kLanes]) {
  return ((lane[0] + lane[1]) + (lane[2] + lane[3])) + ((lane[4] + lane[5]) + (lane[6] + lane[7]));
}

template <typename T>
ColumnStats stats_of(std::span<const T> values) {
  ColumnStats s;
  constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
  constexpr double kInf = std::numeric_limits<double>::infinity();
  double sums[kLanes] = {}, lows[kLanes], highs[kLanes];
  std::int64_t counts[kLanes] = {};
  std::fill(lows, lows + kLanes, kInf);
  std::fill(highs, highs + kLanes, -kInf);
  const std::size_t size = values.size();
  const T* data = values.data();
  // Selects, not branches, so the lanes vectorise.
  auto add = [&](int l, T value) {
    const bool seen = !std::isnan(value);
    const double x = seen ? static_cast<double>(value) : 0.0;
    sums[l] += x;
    counts[l] += seen ? 1 : 0;
    const double low = seen ? x : kInf, high = seen ? x : -kInf;
    lows[l] = low < lows[l] ? low : lows[l];
    highs[l] = high > highs[l] ? high : highs[l];
  };
  std::size_t i = 0;
  for (; i + kLanes <= size; i += kLanes)
    for (int l = 0; l < kLanes; ++l) add(l, data[i + static_cast<std::size_t>(l)]);
  for (int l = 0; i < size; ++i, ++l) add(l, data[i]);
  double lo = kInf, hi = -kInf;
  std::int64_t n = 0;
  for (int l = 0; l < kLanes; ++l) {
    lo = std::min(lo, lows[l]);
    hi = std::max(hi, highs[l]);
    n += counts[l];
  }
  s.n = n;
  s.missing = static_cast<std::int64_t>(size) - n;
  if (n == 0) {
    s.mean = s.variance = s.min = s.max = kNaN;
    return s;
  }
  const double mean = combine(sums) / static_cast<double>(n);
  double square_lanes[kLanes] = {}, deviation_lanes[kLanes] = {};
  auto deviate = [&](int l, T value) {
    const bool seen = !std::isnan(value);
    const double d = seen ? static_cast<double>(value) - mean : 0.0;
    square_lanes[l] += d * d;
    deviation_lanes[l] += d;
  };
  i = 0;
  for (; i + kLanes <= size; i += kLanes)
    for (int l = 0; l < kLanes; ++l) deviate(l, data[i + static_cast<std::size_t>(l)]);
  for (int l = 0; i < size; ++i, ++l) deviate(l, data[i]);
  const double squares = combine(square_lanes), deviations = combine(deviation_lanes);
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
