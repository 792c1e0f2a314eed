#include "pare/stats.h"

#include <algorithm>  // std::min, std::max
#include <cmath>      // std::isnan

#include "internal/columns.h"
#include "internal/omp.h"
#include "kernels/kernels.h"

namespace pare {

namespace {

// The statistics come from the dispatched kernel (src/kernels/kernels.h): 8 interleaved lanes of
// sums combined in a fixed order, the same bits on every instruction-set level.
ColumnStats from_kernel(const kernels::Stats& k) {
  ColumnStats s;
  s.n = k.n;
  s.missing = k.missing;
  s.mean = k.mean;
  s.variance = k.variance;
  s.min = k.min;
  s.max = k.max;
  return s;
}

}  // namespace

// Columns per parallel chunk; a matrix on disk gives back each chunk's pages once it is done.
constexpr Eigen::Index kChunk = 64;

ColumnStats column_stats(std::span<const float> values) {
  return from_kernel(kernels::column_stats(values.data(), values.size()));
}
ColumnStats column_stats(std::span<const double> values) {
  return from_kernel(kernels::column_stats(values.data(), values.size()));
}

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
