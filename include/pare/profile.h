// `scan`: a profile of a data set — per-feature statistics and flags, per-sample missingness,
// class balance — and its profile.tsv form.
#pragma once

#include <cstdint>  // std::int64_t, std::uint8_t
#include <string>   // std::string
#include <vector>   // std::vector

#include "pare/matrix.h"
#include "pare/stats.h"

namespace pare {

/// Flags of one feature (bits).
enum FeatureFlag : std::uint8_t {
  kFlagAllMissing = 1,     ///< no observed value
  kFlagConstant = 2,       ///< every observed value equal
  kFlagNearConstant = 4,   ///< sd below `near_constant_cv` x |mean| (and not constant)
  kFlagMostlyMissing = 8,  ///< missing rate above `mostly_missing`
  kFlagDuplicateName = 16, ///< the file gave another feature the same name (FeatureTable::renamed)
};

/// Thresholds of the profile.
struct ProfileOptions {
  double mostly_missing = 0.2;     ///< feature missing rate above which it is flagged
  double sample_missing = 0.2;     ///< sample missing rate above which it is counted
  double near_constant_cv = 1e-3;  ///< coefficient of variation below which a feature is flagged
  int threads = 0;
};

/// The profile of a data set.
struct Profile {
  std::vector<ColumnStats> features;
  std::vector<std::uint8_t> flags;             ///< FeatureFlag bits per feature
  std::vector<std::int64_t> sample_missing;    ///< missing cells per sample
  std::int64_t missing_cells = 0;
  std::int64_t n_all_missing = 0, n_constant = 0, n_near_constant = 0, n_mostly_missing = 0,
               n_duplicate_name = 0;
  std::vector<std::int64_t> samples_over;      ///< indices of samples above `sample_missing`
  ClassCodes classes;                           ///< empty when the data has no labels
  ProfileOptions options;
};

/// Profiles `table`.
Profile profile_table(const FeatureTable& table, const ProfileOptions& options = {});

/// The flags of one feature as text, comma-separated (empty when none).
std::string flag_names(std::uint8_t flags);

/// profile.tsv: one line per feature with feature, index, n, missing, missing_rate, mean, variance,
/// sd, min, max, flags. Undefined statistics (no observed value, or variance of one value) are NA.
std::string profile_tsv(const FeatureTable& table, const Profile& profile);

}  // namespace pare
