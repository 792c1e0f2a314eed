#include "pare/profile.h"

#include <cmath>          // std::sqrt, std::abs
#include <string_view>    // std::string_view
#include <unordered_map>  // std::unordered_map
#include <vector>         // std::vector

#include "internal/format.h"

namespace pare {

Profile profile_table(const FeatureTable& table, const ProfileOptions& options) {
  Profile p;
  p.options = options;
  p.features = compute_column_stats(table.values, options.threads);
  p.sample_missing = missing_per_row(table.values, options.threads);
  const auto n_features = p.features.size();
  p.flags.assign(n_features, 0);

  std::unordered_map<std::string_view, std::int64_t> name_count;
  name_count.reserve(n_features * 2);
  for (const auto& name : table.feature_names) ++name_count[name];
  // The reader makes repeated names unique (NAME#2, ...): the renamed features, and the first
  // feature of each name they repeated, are flagged as the file wrote them.
  std::vector<char> repeated(n_features, 0);
  if (!table.renamed.empty()) {
    std::unordered_map<std::string_view, std::size_t> index_of;
    index_of.reserve(n_features * 2);
    for (std::size_t j = 0; j < n_features; ++j) index_of.emplace(table.feature_names[j], j);
    for (const auto& [j, name] : table.renamed) {
      repeated[static_cast<std::size_t>(j)] = 1;
      if (const auto it = index_of.find(name); it != index_of.end()) repeated[it->second] = 1;
    }
  }

  for (std::size_t j = 0; j < n_features; ++j) {
    const ColumnStats& s = p.features[j];
    std::uint8_t f = 0;
    if (s.n == 0) f |= kFlagAllMissing;
    else if (s.min == s.max) f |= kFlagConstant;
    else if (s.n >= 2 && std::sqrt(s.variance) < options.near_constant_cv * std::abs(s.mean))
      f |= kFlagNearConstant;
    if (s.missing_rate() > options.mostly_missing) f |= kFlagMostlyMissing;
    if (repeated[j] || name_count[table.feature_names[j]] > 1) f |= kFlagDuplicateName;
    p.flags[j] = f;
    p.missing_cells += s.missing;
    p.n_all_missing += (f & kFlagAllMissing) != 0;
    p.n_constant += (f & kFlagConstant) != 0;
    p.n_near_constant += (f & kFlagNearConstant) != 0;
    p.n_mostly_missing += (f & kFlagMostlyMissing) != 0;
    p.n_duplicate_name += (f & kFlagDuplicateName) != 0;
  }
  const auto n_features_d = static_cast<double>(n_features);
  for (std::size_t i = 0; i < p.sample_missing.size(); ++i)
    if (n_features > 0 &&
        static_cast<double>(p.sample_missing[i]) / n_features_d > options.sample_missing)
      p.samples_over.push_back(static_cast<std::int64_t>(i));
  if (table.has_labels()) p.classes = encode_classes(table.labels);
  return p;
}

std::string flag_names(std::uint8_t flags) {
  static constexpr std::pair<std::uint8_t, const char*> kNames[] = {
      {kFlagAllMissing, "all_missing"},       {kFlagConstant, "constant"},
      {kFlagNearConstant, "near_constant"},   {kFlagMostlyMissing, "mostly_missing"},
      {kFlagDuplicateName, "duplicate_name"},
  };
  std::string out;
  for (const auto& [bit, name] : kNames) {
    if (!(flags & bit)) continue;
    if (!out.empty()) out += ',';
    out += name;
  }
  return out;
}

std::string profile_tsv(const FeatureTable& table, const Profile& profile) {
  std::string out = "feature\tindex\tn\tmissing\tmissing_rate\tmean\tvariance\tsd\tmin\tmax\tflags\n";
  out.reserve(out.size() + profile.features.size() * 120);
  for (std::size_t j = 0; j < profile.features.size(); ++j) {
    const ColumnStats& s = profile.features[j];
    internal::append_field(out, table.feature_names[j], '\t');
    out += '\t';
    out += std::to_string(j + 1);
    out += '\t';
    out += std::to_string(s.n);
    out += '\t';
    out += std::to_string(s.missing);
    out += '\t';
    internal::append_number(out, s.missing_rate());
    out += '\t';
    internal::append_number(out, s.mean);
    out += '\t';
    internal::append_number(out, s.variance);
    out += '\t';
    internal::append_number(out, std::sqrt(s.variance));
    out += '\t';
    // The matrix is float32, so min and max are float32 values: print them as such.
    internal::append_number(out, static_cast<float>(s.min));
    out += '\t';
    internal::append_number(out, static_cast<float>(s.max));
    out += '\t';
    out += flag_names(profile.flags[j]);
    out += '\n';
  }
  return out;
}

}  // namespace pare
