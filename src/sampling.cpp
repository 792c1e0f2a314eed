// Sampling and class balancing (include/pare/sampling.h).
#include "pare/sampling.h"

#include <algorithm>  // std::sort, std::stable_sort, std::min, std::max_element, std::min_element
#include <cmath>      // std::floor, std::llround
#include <map>        // std::map
#include <numeric>    // std::iota

#include "internal/format.h"
#include "internal/random.h"
#include "pare/error.h"

namespace pare {

namespace {

// Streams of the run's seed: "SU" the subsample, "BA" + 1 + the subset for the balanced scores
// (0 without subsets), "BE" the balanced export; apart from the folds', the subsets' and the
// projection's.
constexpr std::uint64_t kSubsampleStream = 0x53550000;
constexpr std::uint64_t kExportStream = 0x42450000;
constexpr std::size_t kTargetBlock = 10;  // samples per stratum of a continuous target

using internal::shuffle;

// How many of each stratum a subset of `fraction` takes (stratified_rows).
std::vector<std::int64_t> stratum_counts(const std::vector<std::vector<std::int64_t>>& strata, double fraction) {
  std::int64_t n = 0;
  for (const auto& s : strata) n += static_cast<std::int64_t>(s.size());
  const auto total = static_cast<std::int64_t>(std::llround(fraction * static_cast<double>(n)));
  std::vector<std::int64_t> take(strata.size());
  std::vector<double> rest(strata.size());
  std::int64_t sum = 0;
  for (std::size_t c = 0; c < strata.size(); ++c) {
    const double exact = fraction * static_cast<double>(strata[c].size());
    take[c] = static_cast<std::int64_t>(std::floor(exact));
    rest[c] = exact - static_cast<double>(take[c]);
    sum += take[c];
  }
  std::vector<std::size_t> by_rest(strata.size());
  std::iota(by_rest.begin(), by_rest.end(), std::size_t{0});
  std::stable_sort(by_rest.begin(), by_rest.end(), [&](std::size_t a, std::size_t b) { return rest[a] > rest[b]; });
  for (std::size_t i = 0; sum < total && i < by_rest.size(); ++i) {
    if (take[by_rest[i]] < static_cast<std::int64_t>(strata[by_rest[i]].size())) {
      ++take[by_rest[i]];
      ++sum;
    }
  }
  for (std::size_t c = 0; c < strata.size(); ++c)
    if (take[c] == 0 && strata[c].size() >= 2) take[c] = 1;
  return take;
}

std::string id_of(const FeatureTable& t, std::int64_t row) {
  return t.sample_ids.empty() ? "sample-" + std::to_string(row + 1) : t.sample_ids[static_cast<std::size_t>(row)];
}

}  // namespace

std::vector<std::vector<std::int64_t>> sample_strata(const FeatureTable& t) {
  const auto n = static_cast<std::size_t>(t.n_samples());
  std::vector<std::vector<std::int64_t>> strata;
  if (t.has_labels()) {
    const ClassCodes codes = encode_classes(t.labels);
    strata.resize(codes.classes.size());
    for (std::size_t i = 0; i < n; ++i)
      strata[static_cast<std::size_t>(codes.codes[i])].push_back(static_cast<std::int64_t>(i));
  } else if (t.has_target()) {
    std::vector<std::int64_t> order(n);
    std::iota(order.begin(), order.end(), 0);
    std::stable_sort(order.begin(), order.end(), [&](std::int64_t a, std::int64_t b) {
      return t.target[static_cast<std::size_t>(a)] < t.target[static_cast<std::size_t>(b)];
    });
    for (std::size_t start = 0; start < n; start += kTargetBlock) {
      strata.emplace_back(order.begin() + static_cast<std::ptrdiff_t>(start),
                          order.begin() + static_cast<std::ptrdiff_t>(std::min(n, start + kTargetBlock)));
      std::sort(strata.back().begin(), strata.back().end());
    }
  } else {
    strata.emplace_back(n);
    std::iota(strata.back().begin(), strata.back().end(), 0);
  }
  std::erase_if(strata, [](const auto& s) { return s.empty(); });
  return strata;
}

std::vector<std::int64_t> stratified_rows(const std::vector<std::vector<std::int64_t>>& strata, double fraction,
                                          std::uint64_t seed, std::uint64_t stream) {
  const std::vector<std::int64_t> take = stratum_counts(strata, fraction);
  internal::Rng rng(seed, stream);
  std::vector<std::int64_t> rows;
  for (std::size_t c = 0; c < strata.size(); ++c) {
    std::vector<std::int64_t> members = strata[c];
    shuffle(members, rng);
    rows.insert(rows.end(), members.begin(), members.begin() + static_cast<std::ptrdiff_t>(take[c]));
  }
  std::sort(rows.begin(), rows.end());
  return rows;
}

std::vector<std::int64_t> subsample_rows(const FeatureTable& t, double amount, std::uint64_t seed) {
  const auto n = static_cast<double>(t.n_samples());
  const bool count = amount >= 2 && amount == std::floor(amount);
  if (!count && !(amount > 0 && amount < 1))
    throw_usage_error("`subsample` must be a whole number of samples (2 or more) or a fraction between 0 and 1");
  if (count && amount >= n)
    throw Error(ErrorKind::kInput, t.source + ": `subsample` " + std::to_string(static_cast<std::int64_t>(amount)) +
                                       " is not below the " + std::to_string(t.n_samples()) +
                                       " samples (leave it out to use them all)");
  return stratified_rows(sample_strata(t), count ? amount / n : amount, seed, kSubsampleStream);
}

void require_balanceable(const FeatureTable& t) {
  const ClassCodes codes = encode_classes(t.labels);
  const auto smallest = std::min_element(codes.counts.begin(), codes.counts.end());
  if (smallest == codes.counts.end() || *smallest >= 3) return;
  const std::string& name = codes.classes[static_cast<std::size_t>(smallest - codes.counts.begin())];
  throw Error(ErrorKind::kInput,
              (t.labels_source.empty() ? t.source : t.labels_source) + ": `balance` smallest would score every class on " +
                  std::to_string(*smallest) + " sample" + (*smallest == 1 ? "" : "s") + " (class " + name + " has " +
                  std::to_string(*smallest) + "), which says nothing; `min_class_size` 3 leaves such classes out, or "
                  "leave out `balance`");
}

Balance parse_balance(const std::string& name) {
  if (name == "smallest") return Balance::kSmallest;
  if (name == "none") return Balance::kNone;
  throw_usage_error("`balance` " + name + " is not smallest (or none)");
}

std::vector<std::int64_t> balance_rows(const std::vector<std::string>& labels, std::span<const std::int64_t> rows,
                                       std::uint64_t seed, std::uint64_t stream) {
  std::vector<std::int64_t> all;
  if (rows.empty()) {
    all.resize(labels.size());
    std::iota(all.begin(), all.end(), 0);
    rows = all;
  }
  std::map<std::string, std::vector<std::int64_t>> members;  // classes in name order
  for (const std::int64_t i : rows) members[labels[static_cast<std::size_t>(i)]].push_back(i);
  std::size_t smallest = rows.size();
  for (const auto& [name, m] : members) smallest = std::min(smallest, m.size());
  internal::Rng rng(seed, stream);
  std::vector<std::int64_t> out;
  for (auto& [name, m] : members) {
    shuffle(m, rng);
    out.insert(out.end(), m.begin(), m.begin() + static_cast<std::ptrdiff_t>(smallest));
  }
  std::sort(out.begin(), out.end());
  return out;
}

BalanceExport parse_balance_export(const std::string& name) {
  if (name == "smallest") return BalanceExport::kSmallest;
  if (name == "largest") return BalanceExport::kLargest;
  if (name == "smote") return BalanceExport::kSmote;
  throw_usage_error("`balance_export` " + name + " is not one of smallest, largest, smote");
}

const char* balance_export_name(BalanceExport how) {
  switch (how) {
    case BalanceExport::kSmallest: return "smallest";
    case BalanceExport::kLargest: return "largest";
    case BalanceExport::kSmote: return "smote";
    case BalanceExport::kNone: break;
  }
  return "none";
}

namespace {

// The builder of a balanced set: rows copied or made, in order.
class BalancedBuilder {
 public:
  BalancedBuilder(const FeatureTable& t, std::span<const std::int64_t> columns) : t_(t), columns_(columns) {}

  void copy(std::int64_t row, std::string id, std::string origin) {
    rows_.emplace_back(columns_.size());
    for (std::size_t c = 0; c < columns_.size(); ++c) rows_.back()[c] = t_.values(row, columns_[c]);
    out_.ids.push_back(std::move(id));
    out_.labels.push_back(t_.labels[static_cast<std::size_t>(row)]);
    out_.origin.push_back(std::move(origin));
  }

  // A repeat of `row`: ID#2, ID#3, ... by how often it appeared so far.
  void repeat(std::int64_t row) {
    const int times = ++seen_[row];
    copy(row, id_of(t_, row) + "#" + std::to_string(times), "repeat of " + id_of(t_, row));
  }

  // x + u (y - x), computed in double.
  void between(std::int64_t x, std::int64_t y, double u) {
    rows_.emplace_back(columns_.size());
    for (std::size_t c = 0; c < columns_.size(); ++c) {
      const double a = t_.values(x, columns_[c]), b = t_.values(y, columns_[c]);
      rows_.back()[c] = static_cast<float>(a + u * (b - a));
    }
    out_.ids.push_back("synthetic-" + std::to_string(++synthetic_));
    out_.labels.push_back(t_.labels[static_cast<std::size_t>(x)]);
    std::string gap;
    internal::append_rounded(gap, u, 3);
    out_.origin.push_back("between " + id_of(t_, x) + " and " + id_of(t_, y) + " (gap " + gap + ")");
  }

  void first_seen(std::int64_t row) { seen_[row] = 1; }

  BalancedSamples finish() {
    out_.values.resize(static_cast<Eigen::Index>(rows_.size()), static_cast<Eigen::Index>(columns_.size()));
    for (std::size_t i = 0; i < rows_.size(); ++i)
      for (std::size_t c = 0; c < columns_.size(); ++c)
        out_.values(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(c)) = rows_[i][c];
    return std::move(out_);
  }

 private:
  const FeatureTable& t_;
  std::span<const std::int64_t> columns_;
  std::vector<std::vector<float>> rows_;
  std::map<std::int64_t, int> seen_;
  std::int64_t synthetic_ = 0;
  BalancedSamples out_;
};

// The k nearest other members of `members` to members[a] (Euclidean over `columns`, in double; ties
// by position), as positions in `members`.
std::vector<std::size_t> nearest(const FeatureTable& t, std::span<const std::int64_t> columns,
                                 const std::vector<std::int64_t>& members, std::size_t a, std::size_t k) {
  std::vector<std::pair<double, std::size_t>> d;
  for (std::size_t b = 0; b < members.size(); ++b) {
    if (b == a) continue;
    double sum = 0;
    for (const std::int64_t c : columns) {
      const double diff = static_cast<double>(t.values(members[a], c)) - static_cast<double>(t.values(members[b], c));
      sum += diff * diff;
    }
    d.emplace_back(sum, b);
  }
  std::partial_sort(d.begin(), d.begin() + static_cast<std::ptrdiff_t>(k), d.end());
  std::vector<std::size_t> out;
  for (std::size_t i = 0; i < k; ++i) out.push_back(d[i].second);
  return out;
}

}  // namespace

BalancedSamples balanced_samples(const FeatureTable& t, std::span<const std::int64_t> columns, BalanceExport how,
                                 std::uint64_t seed, int neighbors) {
  if (!t.has_labels()) throw Error(ErrorKind::kInput, t.source + ": `balance_export` needs class labels");
  const ClassCodes codes = encode_classes(t.labels);
  if (codes.classes.size() < 2)
    throw Error(ErrorKind::kInput, t.source + ": `balance_export` needs two or more classes");
  std::vector<std::vector<std::int64_t>> members(codes.classes.size());
  for (std::size_t i = 0; i < codes.codes.size(); ++i)
    members[static_cast<std::size_t>(codes.codes[i])].push_back(static_cast<std::int64_t>(i));
  const auto smallest = *std::min_element(codes.counts.begin(), codes.counts.end());
  const auto largest = *std::max_element(codes.counts.begin(), codes.counts.end());
  internal::Rng rng(seed, kExportStream);
  BalancedBuilder out(t, columns);
  if (how == BalanceExport::kSmallest) {
    std::vector<std::int64_t> rows;
    for (auto m : members) {
      shuffle(m, rng);
      rows.insert(rows.end(), m.begin(), m.begin() + smallest);
    }
    std::sort(rows.begin(), rows.end());
    for (const std::int64_t i : rows) out.copy(i, id_of(t, i), "sample");
    return out.finish();
  }
  for (std::int64_t i = 0; i < t.n_samples(); ++i) {
    out.copy(i, id_of(t, i), "sample");
    out.first_seen(i);
  }
  for (const auto& m : members) {
    const auto size = static_cast<std::int64_t>(m.size());
    if (how == BalanceExport::kLargest || size == 1) {
      for (std::int64_t e = size; e < largest; ++e) out.repeat(m[rng.below(m.size())]);
      continue;
    }
    const std::size_t k = std::min<std::size_t>(static_cast<std::size_t>(std::max(neighbors, 1)), m.size() - 1);
    std::map<std::size_t, std::vector<std::size_t>> near;  // computed for the members drawn
    for (std::int64_t e = size; e < largest; ++e) {
      const std::size_t a = rng.below(m.size());
      auto it = near.find(a);
      if (it == near.end()) it = near.emplace(a, nearest(t, columns, m, a, k)).first;
      const std::size_t b = it->second[rng.below(k)];
      out.between(m[a], m[b], rng.uniform());
    }
  }
  return out.finish();
}

}  // namespace pare
