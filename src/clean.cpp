// Cleaning before the selection (include/pare/clean.h).
#include "pare/clean.h"

#include <algorithm>  // std::sort, std::min, std::max
#include <cmath>      // std::isnan, std::floor
#include <numeric>    // std::iota

#include "internal/omp.h"
#include "pare/error.h"
#include "pare/samples.h"

namespace pare {

namespace {

// The value of ascending `v` (size p) at fractional position `at` in [0, p − 1], interpolated.
double at_position(std::span<const double> v, double at) {
  const auto below = static_cast<std::size_t>(std::floor(at));
  if (below + 1 >= v.size()) return v.back();
  const double w = at - static_cast<double>(below);
  return w == 0 ? v[below] : v[below] + w * (v[below + 1] - v[below]);
}

// Rank r (0-based) of m observed values, at its position among p reference values.
double position(std::size_t r, std::size_t m, std::size_t p) {
  if (m <= 1) return static_cast<double>(p - 1) / 2;
  if (m == p) return static_cast<double>(r);
  return static_cast<double>(r) * static_cast<double>(p - 1) / static_cast<double>(m - 1);
}

}  // namespace

Normalize parse_normalize(const std::string& name) {
  if (name == "sum") return Normalize::kSum;
  if (name == "quantile") return Normalize::kQuantile;
  if (name == "none") return Normalize::kNone;
  throw_usage_error("`normalize` " + name + " is not one of sum, quantile");
}

const char* normalize_name(Normalize n) {
  return n == Normalize::kSum ? "sum" : n == Normalize::kQuantile ? "quantile" : "none";
}

std::vector<std::pair<std::string, double>> drop_sparse_samples(FeatureTable& t, double above,
                                                                const MemoryBudget& budget) {
  const Eigen::Index n = t.values.rows(), p = t.values.cols();
  std::vector<std::int64_t> missing(static_cast<std::size_t>(n), 0);
  for (Eigen::Index j = 0; j < p; ++j) {
    const float* x = t.values.col(j).data();
    for (Eigen::Index i = 0; i < n; ++i) missing[static_cast<std::size_t>(i)] += std::isnan(x[i]);
  }
  std::vector<std::pair<std::string, double>> dropped;
  std::vector<std::int64_t> keep;
  for (Eigen::Index i = 0; i < n; ++i) {
    const double rate = p > 0 ? static_cast<double>(missing[static_cast<std::size_t>(i)]) / static_cast<double>(p) : 0.0;
    if (rate > above)
      dropped.emplace_back(t.sample_ids[static_cast<std::size_t>(i)], rate);
    else
      keep.push_back(i);
  }
  if (!dropped.empty()) {
    if (keep.empty())
      throw Error(ErrorKind::kInput, t.source + ": every sample has more than " + std::to_string(above) +
                                         " of its values missing (`drop_samples_missing_above`); check the file or "
                                         "raise the limit");
    keep_samples(t, keep, budget);
  }
  return dropped;
}

std::vector<char> count_floor_pass(const ConstMatrixRef& values, double floor, std::int64_t samples, int threads) {
  const Eigen::Index n = values.rows(), p = values.cols();
  std::vector<char> pass(static_cast<std::size_t>(p), 0);
#pragma omp parallel for schedule(static) num_threads(internal::thread_count(threads))
  for (Eigen::Index j = 0; j < p; ++j) {
    const float* x = values.col(j).data();
    std::int64_t above = 0;
    for (Eigen::Index i = 0; i < n; ++i) above += x[i] >= floor;  // NaN compares false
    pass[static_cast<std::size_t>(j)] = above >= samples;
  }
  return pass;
}

void normalize_sum(MatrixRef values, std::span<const std::int64_t> columns, const std::vector<std::string>& ids,
                   const std::vector<std::string>& names, const std::string& source) {
  const Eigen::Index n = values.rows();
  std::vector<double> sum(static_cast<std::size_t>(n), 0.0);
  for (const std::int64_t j : columns) {
    const float* x = values.col(j).data();
    for (Eigen::Index i = 0; i < n; ++i) {
      if (x[i] < 0)
        throw Error(ErrorKind::kInput, source + ": feature " + names[static_cast<std::size_t>(j)] +
                                           " has a negative value (sample " + ids[static_cast<std::size_t>(i)] +
                                           "), so `normalize` sum cannot apply: it scales counts or other "
                                           "non-negative amounts (quantile takes any values)");
      if (!std::isnan(x[i])) sum[static_cast<std::size_t>(i)] += static_cast<double>(x[i]);
    }
  }
  for (Eigen::Index i = 0; i < n; ++i)
    if (!(sum[static_cast<std::size_t>(i)] > 0))
      throw Error(ErrorKind::kInput, source + ": sample " + ids[static_cast<std::size_t>(i)] +
                                         " sums to " + std::to_string(sum[static_cast<std::size_t>(i)]) +
                                         ", so `normalize` sum cannot scale it to 10^6 (sum needs counts or other "
                                         "non-negative amounts)");
  for (const std::int64_t j : columns) {
    float* x = values.col(j).data();
    for (Eigen::Index i = 0; i < n; ++i)
      if (!std::isnan(x[i])) x[i] = static_cast<float>(static_cast<double>(x[i]) * 1e6 / sum[static_cast<std::size_t>(i)]);
  }
}

std::vector<double> quantile_reference(const ConstMatrixRef& values, std::span<const std::int64_t> columns) {
  const Eigen::Index n = values.rows();
  const std::size_t p = columns.size();
  std::vector<double> reference(p, 0.0), row;
  std::int64_t rows = 0;
  for (Eigen::Index i = 0; i < n; ++i) {
    row.clear();
    for (const std::int64_t j : columns)
      if (const float v = values(i, j); !std::isnan(v)) row.push_back(static_cast<double>(v));
    if (row.empty()) continue;
    std::sort(row.begin(), row.end());
    for (std::size_t q = 0; q < p; ++q)
      reference[q] += row.size() == p ? row[q] : at_position(row, position(q, p, row.size()));
    ++rows;
  }
  for (double& v : reference) v /= static_cast<double>(std::max<std::int64_t>(rows, 1));
  return reference;
}

void quantile_map(MatrixRef values, std::span<const std::int64_t> columns, std::span<const double> reference,
                  int threads) {
  const Eigen::Index n = values.rows();
  const std::size_t p = reference.size();
#pragma omp parallel num_threads(internal::thread_count(threads))
  {
    std::vector<std::pair<double, std::int64_t>> row;  // (value, column)
#pragma omp for schedule(dynamic, 8)
    for (Eigen::Index i = 0; i < n; ++i) {
      row.clear();
      for (const std::int64_t j : columns)
        if (const float v = values(i, j); !std::isnan(v)) row.emplace_back(static_cast<double>(v), j);
      std::sort(row.begin(), row.end());
      const std::size_t m = row.size();
      for (std::size_t a = 0; a < m;) {
        std::size_t b = a;
        while (b + 1 < m && row[b + 1].first == row[a].first) ++b;
        double sum = 0;
        for (std::size_t r = a; r <= b; ++r) sum += at_position(reference, position(r, m, p));
        const auto mapped = static_cast<float>(sum / static_cast<double>(b - a + 1));
        for (std::size_t r = a; r <= b; ++r) values(i, row[r].second) = mapped;
        a = b + 1;
      }
    }
  }
}

}  // namespace pare
