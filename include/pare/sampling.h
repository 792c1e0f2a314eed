// Sampling and class balancing (SPEC §9): the strata random subsets are drawn within, a stratified
// subset for a quick pass (--subsample), classes down-sampled to the smallest for the scores
// (--balance smallest), and a balanced copy of the reduced matrix for training a model
// (--balance-export). Every draw is seeded; nothing here changes what apply does.
#pragma once

#include <cstdint>  // std::int64_t, std::uint64_t
#include <span>     // std::span
#include <string>   // std::string
#include <vector>   // std::vector

#include "pare/matrix.h"

namespace pare {

/// The strata subsets are drawn within: the classes (in name order) when `table` has labels; for a
/// continuous target, consecutive blocks of 10 samples in target order (ties in table order, the
/// last block the rest); otherwise one stratum. Samples as row indices, ascending.
std::vector<std::vector<std::int64_t>> sample_strata(const FeatureTable& table);

/// A stratified random subset of `fraction` of the samples of `strata` (rows ascending), drawn from
/// stream `stream` of `seed`: from each stratum of s samples floor(fraction·s) or one more, the extra
/// ones going to the strata with the largest remainders (ties to the first) until the subset holds
/// round(fraction·n); a stratum of 2 or more always gives at least one (which may add to that).
std::vector<std::int64_t> stratified_rows(const std::vector<std::vector<std::int64_t>>& strata, double fraction,
                                          std::uint64_t seed, std::uint64_t stream);

/// --subsample: `amount` >= 2 (a whole number) is a count of samples, 0 < amount < 1 a fraction;
/// the rows (ascending) of a stratified subset of that size (stratified_rows over sample_strata).
/// Throws Error(kUsage) naming `subsample` for another value, Error(kInput) when the count is not
/// below the samples of `table`.
std::vector<std::int64_t> subsample_rows(const FeatureTable& table, double amount, std::uint64_t seed);

/// How scores are balanced across classes.
enum class Balance {
  kNone,
  kSmallest,  ///< every class down-sampled to the smallest class's size
};
/// Parses smallest (the only method; "none" turns it off); throws Error(kUsage) otherwise.
Balance parse_balance(const std::string& name);

/// Throws Error(kInput) when the smallest class of `table` has fewer than 3 samples: balancing would
/// score every class on that few (naming the class and pointing to --min-class-size).
void require_balanceable(const FeatureTable& table);

/// The stream of the run's seed the balanced scores draw from ("BA"); stability subset b uses
/// kBalanceStream + 1 + b.
inline constexpr std::uint64_t kBalanceStream = 0x42410000;

/// The rows of `rows` (ascending; all rows when empty) with every class of `labels` down-sampled to
/// the size of the smallest class among them, each class shuffled from stream `stream` of `seed`
/// and its first rows taken; ascending.
std::vector<std::int64_t> balance_rows(const std::vector<std::string>& labels, std::span<const std::int64_t> rows,
                                       std::uint64_t seed, std::uint64_t stream);

/// The balanced copy of the reduced matrix written for model training.
enum class BalanceExport {
  kNone,
  kSmallest,  ///< every class down-sampled to the smallest
  kLargest,   ///< every smaller class oversampled with replacement up to the largest
  kSmote,     ///< every smaller class topped up with SMOTE samples (Chawla et al. 2002)
};
/// Parses smallest|largest|smote; throws Error(kUsage) otherwise.
BalanceExport parse_balance_export(const std::string& name);
const char* balance_export_name(BalanceExport how);

/// Its samples: per sample an id, its class and where it comes from.
struct BalancedSamples {
  std::vector<std::string> ids;     ///< the sample's own id; a repeat ID#2, ID#3, ...; synthetic-1, ...
  std::vector<std::string> labels;
  std::vector<std::string> origin;  ///< "sample", "repeat of ID", "between ID and ID2 (gap 0.37)"
  Matrix values;                    ///< samples x the columns given, as the reduced matrix holds them
};

/// The balanced set of the columns `columns` of `table` (filled and transformed: the reduced
/// matrix's values), classes from table.labels, seeded. Smallest: each class shuffled and its
/// first m kept (m the smallest class size), in table order. Largest: every sample once, then each
/// smaller class drawn with replacement up to the largest size, repeats named ID#2, ID#3, ... in
/// the order drawn. SMOTE: every sample once, then for each smaller class, up to the largest size,
/// a random member x, one of its k nearest neighbours y in its class (Euclidean over the columns;
/// k = min(neighbors, class size - 1)) and u uniform on [0, 1): x + u·(y − x), named synthetic-1, ...
/// in order; a class of one sample is repeated instead. Throws Error(kInput) without labels or
/// with one class.
BalancedSamples balanced_samples(const FeatureTable& table, std::span<const std::int64_t> columns, BalanceExport how,
                                 std::uint64_t seed, int neighbors = 5);

}  // namespace pare
