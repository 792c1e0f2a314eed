// The cache files behind pare::Columns (src/columns.cpp), and keeping the resident size of a matrix
// on disk bounded while its columns are walked.
#pragma once

#include <algorithm>  // std::max, std::min
#include <cstddef>    // std::size_t
#include <cstdint>    // std::int64_t, std::uintptr_t
#include <numeric>    // std::iota
#include <span>       // std::span
#include <string>     // std::string
#include <vector>     // std::vector

#include "pare/matrix.h"

namespace pare::internal {

/// Drops from memory the pages of [data, data + bytes) when they belong to a matrix held in a
/// cache file; does nothing for memory of any other kind. Safe while other threads use
/// neighbouring values: the mapping is shared with the file, so a dropped page keeps its content
/// and is read back from the page cache when next touched. Whole pages are dropped, including the
/// whole 2 MiB windows of the file around the range (see columns.cpp).
void release_pages(const void* data, std::size_t bytes);

/// release_pages for the columns `first` to `last` (inclusive, in either order) of `m`.
inline void release_column_span(const ConstMatrixRef& m, Eigen::Index first, Eigen::Index last) {
  if (m.size() == 0) return;
  const Eigen::Index a = std::min(first, last), b = std::max(first, last);
  release_pages(m.col(a).data(), static_cast<std::size_t>((b - a + 1) * m.rows()) * sizeof(float));
}

/// Creates an unlinked cache file in `dir` ($TMPDIR or /tmp when empty) and returns its
/// descriptor. Throws Error(kOutput) when it cannot.
int make_cache_file(const std::string& dir);

/// The 2 MiB window of a matrix on disk that holds `data` (see release_pages), as an address.
std::uintptr_t window_of(const void* data);

/// True when some matrix lives in a cache file (so callers can skip bookkeeping otherwise).
bool any_on_disk();

/// The positions 0..columns.size()-1 in the order of their column indices (ties in position
/// order): how to walk `columns` front to back through the matrix, in file order.
inline std::vector<std::size_t> file_order(std::span<const std::int64_t> columns) {
  std::vector<std::size_t> order(columns.size());
  std::iota(order.begin(), order.end(), std::size_t{0});
  std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) { return columns[a] < columns[b]; });
  return order;
}

/// Gives back, on disk, the 2 MiB windows a walk over columns has left: call visited() with each
/// column (or part of one) after use; the window of the last one is given back on destruction.
/// Walks in file order then give back each window once, where releasing every column would drop
/// the window the next column is in. One per thread; a no-op for memory.
class WindowWalk {
 public:
  explicit WindowWalk(std::size_t bytes) : bytes_(bytes), on_disk_(any_on_disk()) {}
  WindowWalk(const WindowWalk&) = delete;
  WindowWalk& operator=(const WindowWalk&) = delete;
  ~WindowWalk() {
    if (last_) release_pages(last_, bytes_);
  }
  /// `data` (bytes of them, as given to the constructor) has been used.
  void visited(const void* data) {
    if (!on_disk_) return;
    const std::uintptr_t w = window_of(data);
    if (last_ && w != window_) release_pages(last_, bytes_);
    window_ = w;
    last_ = data;
  }

 private:
  std::size_t bytes_;
  bool on_disk_;
  std::uintptr_t window_ = 0;
  const void* last_ = nullptr;
};

/// Calls body(a) for every position a of `columns` (column indices of `m`), in parallel chunks
/// of 64 positions; each chunk then gives back the pages of its columns when `m` is on disk. On
/// disk the positions are visited in file order (the bodies must not depend on the order), so a
/// chunk stays in one or two 2 MiB windows however `columns` is ordered: columns in rank order
/// would otherwise map and drop a whole window for almost every column.
template <typename Body>
void for_each_column(const ConstMatrixRef& m, std::span<const std::int64_t> columns, int threads, Body&& body) {
  constexpr std::size_t kChunk = 64;
  const std::size_t chunks = (columns.size() + kChunk - 1) / kChunk;
  const bool on_disk = any_on_disk();
  const std::vector<std::size_t> visit = on_disk ? file_order(columns) : std::vector<std::size_t>();
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads)
  for (std::size_t c = 0; c < chunks; ++c) {
    const std::size_t begin = c * kChunk, end = std::min(columns.size(), begin + kChunk);
    WindowWalk walk(static_cast<std::size_t>(m.rows()) * sizeof(float));
    for (std::size_t i = begin; i < end; ++i) {
      const std::size_t a = on_disk ? visit[i] : i;
      body(a);
      walk.visited(m.col(columns[a]).data());
    }
  }
}

}  // namespace pare::internal
