// Cleaning before the selection (SPEC §9), in this order before step 1: samples missing too much
// are left out, features below a count floor are dropped, and every sample is normalised (scaled
// to a common total, or mapped onto a common distribution by quantile normalisation). The
// normalisation's reference is learned on the training samples and kept in the plan, so apply
// puts new samples on the same scale.
#pragma once

#include <cstdint>  // std::int64_t
#include <span>     // std::span
#include <string>   // std::string
#include <utility>  // std::pair
#include <vector>   // std::vector

#include "pare/matrix.h"

namespace pare {

/// How each sample is normalised.
enum class Normalize {
  kNone,
  kSum,       ///< each sample scaled so its values sum to 10^6 (counts per million); nothing learned
  kQuantile,  ///< quantile normalisation (Bolstad et al. 2003) onto a reference learned in training
};
Normalize parse_normalize(const std::string& name);  ///< sum|quantile|none; Error(kUsage) otherwise
const char* normalize_name(Normalize n);

/// Leaves out of `table` the samples whose missing rate (over all features) is above `above`;
/// returns their ids with their rates, in table order. The new matrix is allocated under `budget`.
std::vector<std::pair<std::string, double>> drop_sparse_samples(FeatureTable& table, double above,
                                                                const MemoryBudget& budget);

/// Per feature: 1 when at least `samples` samples have a raw value >= `floor` (gaps count as below).
std::vector<char> count_floor_pass(const ConstMatrixRef& values, double floor, std::int64_t samples, int threads = 0);

/// Scales each row of `values` over the columns `columns` so that its observed values sum to 10^6
/// (in double). A negative value is an Error(kInput) naming the feature (`names`, per column), a
/// row whose sum is not positive one naming the sample (`ids`).
void normalize_sum(MatrixRef values, std::span<const std::int64_t> columns, const std::vector<std::string>& ids,
                   const std::vector<std::string>& names, const std::string& source);

/// The quantile reference of the rows of `values` over `columns` (p of them): for each row, its
/// observed values sorted and read at p evenly spaced positions (linear interpolation when the row
/// has fewer than p observed values: exactly its sorted values when it has none missing), then the
/// mean over the rows at each position. Ascending, p values.
std::vector<double> quantile_reference(const ConstMatrixRef& values, std::span<const std::int64_t> columns);

/// Maps each row of `values` over `columns` onto `reference` (p values, ascending): a value of
/// average rank a..b among the row's m observed values becomes the mean of the reference at the
/// positions of ranks a..b, rank r at position (r − 1)·(p − 1)/(m − 1) (linear interpolation
/// between reference values; with m = p the positions are the ranks). Gaps stay gaps.
void quantile_map(MatrixRef values, std::span<const std::int64_t> columns, std::span<const double> reference,
                  int threads = 0);

}  // namespace pare
