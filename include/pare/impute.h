// Nearest-neighbour imputation (--impute knn, SPEC §9): each gap of a feature is filled with the
// mean of that feature over the k nearest training samples that observe it, nearness being the
// nan-Euclidean distance (CHECKS.md §11) over the features that passed the missing filter, on
// their transformed values. The training values are kept (impute-reference.npy beside the plan) so
// apply fills new samples from the same training samples.
#pragma once

#include <cstdint>  // std::int64_t
#include <functional>   // std::function
#include <string_view>  // std::string_view
#include <memory>   // std::shared_ptr
#include <span>     // std::span
#include <string>   // std::string
#include <vector>   // std::vector

#include "pare/matrix.h"

namespace pare {

/// The training samples' values the fills are taken from.
struct KnnReference {
  std::vector<std::string> features;  ///< the distance features, in the columns' order
  Matrix values;                      ///< training samples x features, transformed, NaN = missing
  int neighbors = 5;                  ///< k
};

/// The fills of one column: (row, value) for each gap filled, rows ascending.
using CellFills = std::vector<std::pair<std::int64_t, float>>;

/// For each column `fill[c]` (a column of `x`, whose distance-feature position is `fill_feature[c]`,
/// an index into reference.features), the fills of its gaps: for a gap in row i, the mean (in
/// double) of that feature over the k nearest reference rows that observe it, k =
/// reference.neighbors, ties by reference row. Distances are nan-Euclidean between row i of `x`
/// over the columns `x_columns` (one per reference feature; -1 when x lacks it: a missing
/// coordinate) and each reference row: d² = (features / present in both) · Σ over the features
/// present in both of (x − r)². Reference rows with no feature in common with row i are not
/// neighbours; a gap with no neighbour gets `fallback[c]`. With `same_rows` (x is the reference), a
/// row is never its own neighbour. Computed in blocks of rows (at most about 256 MB of distances at
/// a time); the same bits for any thread count.
std::vector<CellFills> knn_fills(const ConstMatrixRef& x, std::span<const std::int64_t> x_columns,
                                 const KnnReference& reference, std::span<const std::int64_t> fill,
                                 std::span<const std::int64_t> fill_feature, std::span<const float> fallback,
                                 bool same_rows, int threads = 0);

/// The reference as a NumPy .npy file (version 1.0, little-endian float32, C order, samples x
/// features), handed to `sink` in pieces of about a megabyte.
void write_knn_reference_npy(const KnnReference& reference, const std::function<void(std::string_view)>& sink);

/// Reads the values of such a file (shape rows x cols expected). Throws Error(kInput) naming the
/// file when it is not one.
Matrix read_knn_reference_npy(const std::string& path, std::int64_t rows, std::int64_t cols);

}  // namespace pare
