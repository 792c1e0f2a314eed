#include "pare/reduce.h"

#include <algorithm>  // std::nth_element, std::stable_sort
#include <chrono>     // std::chrono::steady_clock
#include <cmath>      // std::log2, std::isnan, std::sqrt
#include <cstdio>     // std::snprintf
#include <cstring>    // std::memcpy
#include <future>     // std::async
#include <limits>     // std::numeric_limits
#include <numeric>    // std::iota

#include "internal/growable_buffer.h"
#include "internal/criterion_facts.h"
#include "internal/format.h"
#include "internal/omp.h"
#include "internal/columns.h"
#include "pare/error.h"

namespace pare {

namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

std::string g3(double v) {
  char buffer[32];
  std::snprintf(buffer, sizeof buffer, "%.3g", v);
  return buffer;
}

float median_of_observed(const float* x, Eigen::Index n, std::vector<float>& scratch) {
  scratch.clear();
  for (Eigen::Index i = 0; i < n; ++i)
    if (!std::isnan(x[i])) scratch.push_back(x[i]);
  if (scratch.empty()) return 0.0f;
  const std::size_t mid = scratch.size() / 2;
  std::nth_element(scratch.begin(), scratch.begin() + static_cast<std::ptrdiff_t>(mid), scratch.end());
  const float upper = scratch[mid];
  if (scratch.size() % 2 == 1) return upper;
  const float lower = *std::max_element(scratch.begin(), scratch.begin() + static_cast<std::ptrdiff_t>(mid));
  return static_cast<float>((static_cast<double>(lower) + static_cast<double>(upper)) / 2);
}


}  // namespace

Impute parse_impute(const std::string& name) {
  if (name == "mean") return Impute::kMean;
  if (name == "median") return Impute::kMedian;
  if (name == "zero") return Impute::kZero;
  if (name == "knn") return Impute::kKnn;
  throw_usage_error("`impute` " + name + " is not one of mean, median, zero, knn");
}

const char* impute_name(Impute i) {
  return i == Impute::kMean ? "mean" : i == Impute::kMedian ? "median" : i == Impute::kKnn ? "knn" : "zero";
}

float transform_value(float x, bool log2) {
  return log2 ? static_cast<float>(std::log2(static_cast<double>(x) + 1.0)) : x;
}

void check_reduce_options(const ReduceOptions& o) {
  if (!(o.drop_missing_above >= 0 && o.drop_missing_above <= 1))
    throw_usage_error("`drop_missing_above` must be between 0 and 1 (a fraction of the samples)");
  if (!(o.min_variance >= 0)) throw_usage_error("`min_variance` must be 0 or more");
  if (!(o.drop_low_variance >= 0 && o.drop_low_variance < 1))
    throw_usage_error("`drop_low_variance` must be at least 0 and below 1");
  if (!(o.fdr > 0 && o.fdr <= 1)) throw_usage_error("`fdr` must be in (0, 1]", "a q-value threshold such as 0.05");
  if (o.keep < 0) throw_usage_error("`keep` must be 0 (all) or more");
  if (!(o.max_corr > 0 && o.max_corr <= 1))
    throw_usage_error("`max_corr` must be above 0 and at most 1", "an |r| limit such as 0.9; `no_prune` skips the step");
  if (o.score.bins < 2) throw_usage_error("`bins` must be 2 or more");
  if (o.score.neighbors < 1) throw_usage_error("`neighbors` must be 1 or more");
  if (o.impute_neighbors < 1) throw_usage_error("`impute_neighbors` must be 1 or more");
  if (o.floor_samples < 0) throw_usage_error("`floor_samples` must be 0 (no floor) or more");
  if (o.floor_samples > 0 && !(o.count_floor > 0))
    throw_usage_error("`floor_samples` needs `count_floor`: the value N samples must reach", "e.g. 10 reads");
  if (o.threads < 0) throw_usage_error("`threads` must be 0 (all cores) or more");
  check_stability_options(o.stability, o.keep);
  if (o.balance != Balance::kNone && o.rank_by == Criterion::kVariance)
    throw_usage_error("`balance` balances the classes for the scores, and variance uses no classes",
                      "rank by mi, chi2, chi2-counts or f, or leave out `balance`");
  if (o.fdr < 1 && o.rank_by == Criterion::kVariance)
    throw_usage_error("`fdr` needs a criterion with a test, and variance has none",
                      "rank by a criterion with a test (mi, chi2, chi2-counts or f for classes; spearman, pearson or "
                      "mi for a target), or leave out `fdr`");
}

void log2_transform(FeatureTable& t, int threads) {
  const Eigen::Index n = t.values.rows();
  const auto p = static_cast<std::int64_t>(t.values.cols());
  std::vector<std::int64_t> all(static_cast<std::size_t>(p));
  std::iota(all.begin(), all.end(), std::int64_t{0});
  std::vector<float> lowest(static_cast<std::size_t>(p), 0.0f);
  internal::for_each_column(t.values, all, internal::thread_count(threads), [&](std::size_t j) {
    float* x = t.values.col(static_cast<Eigen::Index>(j)).data();
    float low = 0.0f;
    for (Eigen::Index i = 0; i < n; ++i) {
      if (std::isnan(x[i])) continue;
      low = std::min(low, x[i]);
      if (x[i] >= 0) x[i] = transform_value(x[i], true);
    }
    lowest[j] = low;
  });
  for (std::size_t j = 0; j < lowest.size(); ++j)
    if (lowest[j] < 0)
      throw Error(ErrorKind::kInput, t.source + ": feature " + t.feature_names[j] + " has negative values (min " +
                                         g3(lowest[j]) +
                                         "), so `log2` cannot apply (leave out `log2`, or transform it yourself)");
}

void require_some_scored(const FeatureScores& s, Criterion c, const std::string& source) {
  for (std::size_t i = 0; i < s.size(); ++i)
    if (criterion_defined(s, c, i)) return;
  throw Error(ErrorKind::kInput,
              source + ": no feature could be scored by " + criterion_name(c) + " (" + std::to_string(s.size()) +
                  " features: constant, or " + (c == Criterion::kF ? "with no more observed values than classes" : "too few observed values") +
                  "), so a ranking would be the input order (check the labels and the data, or rank by another criterion)");
}

const char* step_name(Step step) {
  switch (step) {
    case Step::kRead: return "read";
    case Step::kFloor: return "floor";
    case Step::kNormalize: return "normalize";
    case Step::kMissing: return "missing";
    case Step::kImpute: return "impute";
    case Step::kTransform: return "transform";
    case Step::kVariance: return "variance";
    case Step::kRelevance: return "relevance";
    case Step::kStability: return "stability";
    case Step::kRedundancy: return "redundancy";
    case Step::kTop: return "top";
    case Step::kProject: return "project";
  }
  return "?";
}

void Selection::drop(std::int64_t j, Step step, std::string reason) {
  Decision& d = decisions[static_cast<std::size_t>(j)];
  d.kept = false;
  d.step = step;
  d.reason = std::move(reason);
}

void transform_column(std::span<float> x, bool log2) {
  if (!log2) return;
  for (float& v : x)
    if (!std::isnan(v)) v = transform_value(v, true);
}

std::int64_t fill_column(std::span<float> x, float raw_fill, bool log2) {
  const float fill = transform_value(raw_fill, log2);
  std::int64_t filled = 0;
  for (float& v : x)
    if (std::isnan(v)) {
      v = fill;
      ++filled;
    }
  return filled;
}

void standardise_column(std::span<float> x, double center, double scale) {
  for (float& v : x) v = static_cast<float>((static_cast<double>(v) - center) / scale);
}

namespace {

std::span<float> column_span(FeatureTable& t, std::int64_t j) {
  return {t.values.col(static_cast<Eigen::Index>(j)).data(), static_cast<std::size_t>(t.values.rows())};
}

// Records a step that took `in` features and left r.alive, timed from `start`.
void record_step(Reduction& r, Step step, std::size_t in, std::chrono::steady_clock::time_point start) {
  const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  r.steps.push_back({step, static_cast<std::int64_t>(in), static_cast<std::int64_t>(r.alive.size()), seconds});
}

}  // namespace

Reduction start_reduction(const FeatureTable& t, const ReduceOptions& o) {
  check_reduce_options(o);
  const auto p = static_cast<std::size_t>(t.values.cols());
  Reduction r;
  r.decisions.resize(p);
  r.variance.assign(p, kNaN);
  r.score_of.assign(p, -1);
  r.fill.assign(p, std::numeric_limits<float>::quiet_NaN());
  r.stats.resize(p);
  r.alive.resize(p);
  std::iota(r.alive.begin(), r.alive.end(), std::int64_t{0});
  r.supervised = o.relevance && (t.has_labels() || t.has_target());
  r.criterion = r.supervised ? o.rank_by : Criterion::kVariance;
  if (r.supervised) require_criterion_fits(o.rank_by, t.has_target());
  if (o.balance != Balance::kNone && t.has_target())
    throw_usage_error("`balance` down-samples classes, and a continuous target has none");
  return r;
}

void filter_missing(const FeatureTable& t, const ReduceOptions& o, Reduction& r) {
  const auto start = std::chrono::steady_clock::now();
  const std::size_t in = r.alive.size();
  r.raw_stats = compute_column_stats(t.values, internal::thread_count(o.threads));
  std::erase_if(r.alive, [&](std::int64_t j) {
    const double rate = r.raw_stats[static_cast<std::size_t>(j)].missing_rate();
    if (!o.missing_filter || rate <= o.drop_missing_above) return false;
    r.drop(j, Step::kMissing, "missing rate " + g3(rate) + " > " + g3(o.drop_missing_above));
    return true;
  });
  record_step(r, Step::kMissing, in, start);
}

// The fill values are learned on the raw scale. The cells are filled after scoring (before step
// 6): the variance filter and the scores use each feature's observed cells only (as documented),
// and correlations and PCA use the filled values.
void learn_fill(const FeatureTable& t, const ReduceOptions& o, Reduction& r) {
  const auto start = std::chrono::steady_clock::now();
  const Eigen::Index n = t.values.rows();
  const int threads = internal::thread_count(o.threads);
  std::vector<std::vector<float>> scratch(static_cast<std::size_t>(threads));
  auto learn = [&](std::size_t a) {
    const std::int64_t j = r.alive[a];
    const ColumnStats& s = r.raw_stats[static_cast<std::size_t>(j)];
    float fill = 0.0f;
    if (s.n > 0 && (o.impute == Impute::kMean || o.impute == Impute::kKnn)) fill = static_cast<float>(s.mean);
    if (s.n > 0 && o.impute == Impute::kMedian)
      fill = median_of_observed(t.values.col(j).data(), n, scratch[static_cast<std::size_t>(omp_get_thread_num())]);
    r.fill[static_cast<std::size_t>(j)] = fill;
  };
  if (o.impute == Impute::kMedian) {
    internal::for_each_column(t.values, r.alive, threads, learn);
  } else {
    for (std::size_t a = 0; a < r.alive.size(); ++a) learn(a);  // no cell is read
  }
  record_step(r, Step::kImpute, r.alive.size(), start);
}

void transform_step(FeatureTable& t, const ReduceOptions& o, Reduction& r) {
  const auto start = std::chrono::steady_clock::now();
  const int threads = internal::thread_count(o.threads);
  if (o.log2) {
    for (const std::int64_t j : r.alive) {
      const ColumnStats& s = r.raw_stats[static_cast<std::size_t>(j)];
      if (s.n > 0 && s.min < 0)
        throw Error(ErrorKind::kInput, t.source + ": feature " + t.feature_names[static_cast<std::size_t>(j)] +
                                           " has negative values (min " + g3(s.min) +
                                           "), so `log2` cannot apply (leave out `log2`, or transform it yourself)");
    }
    internal::for_each_column(t.values, r.alive, threads,
                              [&](std::size_t a) { transform_column(column_span(t, r.alive[a]), true); });
  }
  // The statistics of the observed, transformed values: for the variance filter and scoring.
  if (o.log2) {
    internal::for_each_column(t.values, r.alive, threads, [&](std::size_t a) {
      const auto j = static_cast<std::size_t>(r.alive[a]);
      r.stats[j] = column_stats(std::span<const float>(t.values.col(r.alive[a]).data(),
                                                       static_cast<std::size_t>(t.values.rows())));
    });
  } else {
    for (const std::int64_t j : r.alive) r.stats[static_cast<std::size_t>(j)] = r.raw_stats[static_cast<std::size_t>(j)];
  }
  record_step(r, Step::kTransform, r.alive.size(), start);
}

void filter_variance(const FeatureTable& t, const ReduceOptions& o, Reduction& r) {
  (void)t;
  const auto start = std::chrono::steady_clock::now();
  const std::size_t in = r.alive.size();
  for (const std::int64_t j : r.alive) r.variance[static_cast<std::size_t>(j)] = r.stats[static_cast<std::size_t>(j)].variance;
  if (o.variance_filter) {
    std::erase_if(r.alive, [&](std::int64_t j) {
      const double v = r.variance[static_cast<std::size_t>(j)];
      if (std::isnan(v)) {
        r.drop(j, Step::kVariance, "fewer than 2 observed values");
        return true;
      }
      if (v < o.min_variance) {
        r.drop(j, Step::kVariance, "variance " + g3(v) + " < " + g3(o.min_variance));
        return true;
      }
      return false;
    });
  }
  if (o.variance_filter && o.drop_low_variance > 0 && !r.alive.empty()) {
    std::vector<std::int64_t> by_variance = r.alive;
    std::stable_sort(by_variance.begin(), by_variance.end(), [&](std::int64_t a, std::int64_t b) {
      return r.variance[static_cast<std::size_t>(a)] < r.variance[static_cast<std::size_t>(b)];
    });
    const auto cut = static_cast<std::size_t>(o.drop_low_variance * static_cast<double>(by_variance.size()));
    if (cut > 0) {
      const double boundary = r.variance[static_cast<std::size_t>(by_variance[cut - 1])];
      std::vector<char> gone(r.decisions.size(), 0);
      for (std::size_t k = 0; k < cut; ++k) {
        const std::int64_t j = by_variance[k];
        gone[static_cast<std::size_t>(j)] = 1;
        r.drop(j, Step::kVariance,
               "variance " + g3(r.variance[static_cast<std::size_t>(j)]) + " in the lowest " +
                   g3(100 * o.drop_low_variance) + "% (cut at " + g3(boundary) + ")");
      }
      std::erase_if(r.alive, [&](std::int64_t j) { return gone[static_cast<std::size_t>(j)] != 0; });
    }
  }
  record_step(r, Step::kVariance, in, start);
}

// Scores and ranks against the labels (or by variance without labels; input order when
// options.relevance is off), then cuts at --fdr.
void rank_relevance(const FeatureTable& t, const ReduceOptions& o, Reduction& r) {
  const auto start = std::chrono::steady_clock::now();
  const std::size_t in = r.alive.size();
  if (r.supervised && !r.alive.empty()) {
    ScoreOptions so = o.score;
    so.threads = o.threads;
    so.counts_chi2 = o.rank_by == Criterion::kChi2Counts;
    std::vector<ColumnStats> alive_stats(r.alive.size());
    for (std::size_t a = 0; a < r.alive.size(); ++a) alive_stats[a] = r.stats[static_cast<std::size_t>(r.alive[a])];
    if (o.balance == Balance::kSmallest && t.has_labels()) {
      require_balanceable(t);
      r.scored_rows = balance_rows(t.labels, {}, o.seed, kBalanceStream);
    }
    r.scores = t.has_target() ? score_against_target(t.values, r.alive, t.target, so, alive_stats)
                              : score_features(t.values, r.alive, encode_classes(t.labels), so, alive_stats,
                                               r.scored_rows);
    require_some_scored(r.scores, r.criterion, t.source);
    std::vector<std::int64_t> ordered;
    for (const std::size_t pos : rank_order(r.scores, r.criterion)) {
      const std::int64_t j = r.scores.feature[pos];
      r.score_of[static_cast<std::size_t>(j)] = static_cast<std::int64_t>(pos);
      const double q = criterion_q(r.scores, r.criterion, pos);
      if (o.fdr < 1 && r.criterion != Criterion::kVariance && q > o.fdr)
        r.drop(j, Step::kRelevance,
               std::string(internal::criterion_facts(r.criterion, r.scores.continuous).short_test) + " q = " + g3(q) +
                   " > " + g3(o.fdr));
      else
        ordered.push_back(j);
    }
    r.alive.swap(ordered);
  } else if (o.relevance) {
    std::stable_sort(r.alive.begin(), r.alive.end(), [&](std::int64_t a, std::int64_t b) {
      return r.variance[static_cast<std::size_t>(a)] > r.variance[static_cast<std::size_t>(b)];
    });
  }
  record_step(r, Step::kRelevance, in, start);
}

// Fills the gaps of the candidates (the transformed fill value, as apply computes it), then
// drops each candidate whose |r| with a better-ranked kept one is above max_corr.
void prune_redundant(FeatureTable& t, const ReduceOptions& o, Reduction& r) {
  const auto start = std::chrono::steady_clock::now();
  const std::size_t in = r.alive.size();
  internal::for_each_column(t.values, r.alive, internal::thread_count(o.threads), [&](std::size_t a) {
    const std::int64_t j = r.alive[a];
    const std::span<float> x = column_span(t, j);
    if (!r.cell_fills.empty())
      for (const auto& [row, value] : r.cell_fills[static_cast<std::size_t>(j)]) x[static_cast<std::size_t>(row)] = value;
    fill_column(x, r.fill[static_cast<std::size_t>(j)], o.log2);
  });
  if (o.prune) {
    const std::vector<std::int64_t> ordered = std::move(r.alive);
    r.alive.clear();
    PruneOptions po;
    po.max_corr = o.max_corr;
    po.max_kept = o.keep;
    po.threads = o.threads;
    po.memory_budget = o.memory_budget;
    const PruneResult pr = prune_correlated(t.values, ordered, po);
    std::vector<std::int64_t> kept_rank(ordered.size(), 0);
    std::int64_t rank = 0;
    for (std::size_t i = 0; i < ordered.size(); ++i)
      if (pr.kept[i]) kept_rank[i] = ++rank;
    for (std::size_t i = 0; i < ordered.size(); ++i) {
      const std::int64_t j = ordered[i];
      if (pr.kept[i]) {
        r.alive.push_back(j);
      } else if (static_cast<std::int64_t>(i) >= pr.examined) {
        r.unexamined.push_back(j);
      } else {
        const auto partner = static_cast<std::size_t>(pr.partner[i]);
        char buffer[32];
        std::snprintf(buffer, sizeof buffer, "%.3f", std::abs(pr.r[i]));
        r.drop(j, Step::kRedundancy,
               "|r| = " + std::string(buffer) + " with " + t.feature_names[static_cast<std::size_t>(ordered[partner])] +
                   " (kept, rank " + std::to_string(kept_rank[partner]) + ")");
        r.decisions[static_cast<std::size_t>(j)].partner = ordered[partner];
      }
    }
  }
  const auto seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  r.steps.push_back({Step::kRedundancy, static_cast<std::int64_t>(in),
                     static_cast<std::int64_t>(r.alive.size() + r.unexamined.size()), seconds});
}

// Keeps the first K survivors; the kept features get their rank, and the centre and scale of
// their transformed, filled column (and are standardised with options.scale).
void take_top(FeatureTable& t, const ReduceOptions& o, Reduction& r) {
  const auto start = std::chrono::steady_clock::now();
  const auto in = static_cast<std::int64_t>(r.alive.size() + r.unexamined.size());
  for (std::size_t i = 0; i < r.alive.size(); ++i) {
    const std::int64_t j = r.alive[i];
    if (o.keep > 0 && static_cast<std::int64_t>(i) >= o.keep) {
      r.drop(j, Step::kTop, "rank " + std::to_string(i + 1) + (o.prune ? " after pruning" : "") + "; --keep " +
                                std::to_string(o.keep));
      continue;
    }
    r.kept.push_back(j);
  }
  for (const std::int64_t j : r.unexamined)
    r.drop(j, Step::kTop, "not reached: the first " + std::to_string(o.keep) + " were already kept (--keep " +
                              std::to_string(o.keep) + "), so it was not compared for redundancy");
  r.alive = r.kept;
  r.unexamined.clear();
  if (r.kept.empty()) {
    r.steps.push_back({Step::kTop, in, 0, 0.0});
    std::string counts;
    for (const auto& s : r.steps) counts += (counts.empty() ? "" : ", ") + std::string(step_name(s.step)) + " " + std::to_string(s.out);
    throw Error(ErrorKind::kInput, t.source + ": every feature was filtered out (left after each step: " + counts +
                                       "); loosen the thresholds, e.g. `drop_missing_above`, `min_variance`, `fdr`");
  }
  r.center.resize(r.kept.size());
  r.scale.resize(r.kept.size());
  internal::for_each_column(t.values, r.kept, internal::thread_count(o.threads), [&](std::size_t k) {
    const std::span<float> x = column_span(t, r.kept[k]);
    const ColumnStats s = column_stats(std::span<const float>(x.data(), x.size()));
    r.center[k] = s.mean;
    r.scale[k] = s.n >= 2 && s.variance > 0 ? std::sqrt(s.variance) : 1.0;
    if (o.scale) standardise_column(x, r.center[k], r.scale[k]);
  });
  for (std::size_t k = 0; k < r.kept.size(); ++k) {
    Decision& d = r.decisions[static_cast<std::size_t>(r.kept[k])];
    d.kept = true;
    d.step = Step::kTop;
    d.rank = static_cast<std::int64_t>(k + 1);
    const std::int64_t pos = r.score_of[static_cast<std::size_t>(r.kept[k])];
    if (!o.relevance) {
      d.reason = "position " + std::to_string(k + 1) + " in input order (no ranking)";
      continue;
    }
    d.reason = "rank " + std::to_string(k + 1) + " by " + criterion_name(r.criterion) + " (" +
               g3(pos >= 0 ? criterion_score(r.scores, r.criterion, static_cast<std::size_t>(pos))
                           : r.variance[static_cast<std::size_t>(r.kept[k])]) +
               ")";
  }
  const auto seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  r.steps.push_back({Step::kTop, in, static_cast<std::int64_t>(r.kept.size()), seconds});
}

void learn_knn_fills(const FeatureTable& t, const ReduceOptions& o, Reduction& r) {
  if (o.impute != Impute::kKnn) return;
  const auto start = std::chrono::steady_clock::now();
  auto ref = std::make_shared<KnnReference>();
  ref->neighbors = o.impute_neighbors;
  std::vector<std::int64_t> distance;  // the features that passed the missing filter
  for (std::size_t j = 0; j < r.decisions.size(); ++j)
    if (r.decisions[j].kept || r.decisions[j].step != Step::kMissing) distance.push_back(static_cast<std::int64_t>(j));
  const Eigen::Index n = t.values.rows();
  ref->values.resize(n, static_cast<Eigen::Index>(distance.size()));
  std::vector<std::int64_t> position(r.decisions.size(), -1);
  for (std::size_t c = 0; c < distance.size(); ++c) {
    ref->features.push_back(t.feature_names[static_cast<std::size_t>(distance[c])]);
    ref->values.col(static_cast<Eigen::Index>(c)) = t.values.col(distance[c]);
    position[static_cast<std::size_t>(distance[c])] = static_cast<std::int64_t>(c);
  }
  std::vector<std::int64_t> fill_feature;
  std::vector<float> fallback;
  for (const std::int64_t j : r.alive) {
    fill_feature.push_back(position[static_cast<std::size_t>(j)]);
    fallback.push_back(transform_value(r.fill[static_cast<std::size_t>(j)], o.log2));
  }
  std::vector<std::int64_t> own(distance.size());
  std::iota(own.begin(), own.end(), std::int64_t{0});
  std::vector<CellFills> fills = knn_fills(ref->values, own, *ref, fill_feature, fill_feature, fallback, true, o.threads);
  r.cell_fills.assign(r.decisions.size(), {});
  for (std::size_t a = 0; a < r.alive.size(); ++a) r.cell_fills[static_cast<std::size_t>(r.alive[a])] = std::move(fills[a]);
  r.knn = std::move(ref);
  const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  for (StepRecord& s : r.steps)
    if (s.step == Step::kImpute) s.seconds += seconds;
}

void filter_floor(const FeatureTable& t, const ReduceOptions& o, Reduction& r) {
  if (o.floor_samples <= 0) return;
  const auto start = std::chrono::steady_clock::now();
  const std::size_t in = r.alive.size();
  const std::vector<char> pass = count_floor_pass(t.values, o.count_floor, o.floor_samples, internal::thread_count(o.threads));
  std::erase_if(r.alive, [&](std::int64_t j) {
    if (pass[static_cast<std::size_t>(j)]) return false;
    r.drop(j, Step::kFloor, "fewer than " + std::to_string(o.floor_samples) + " samples at " + g3(o.count_floor) +
                                " or more");
    return true;
  });
  record_step(r, Step::kFloor, in, start);
}

void normalize_step(FeatureTable& t, const ReduceOptions& o, Reduction& r) {
  if (o.normalize == Normalize::kNone) return;
  const auto start = std::chrono::steady_clock::now();
  r.normalized = r.alive;
  if (o.normalize == Normalize::kSum) {
    normalize_sum(t.values, r.normalized, t.sample_ids, t.feature_names, t.source);
  } else {
    r.quantile_reference = quantile_reference(t.values, r.normalized);
    quantile_map(t.values, r.normalized, r.quantile_reference, o.threads);
  }
  record_step(r, Step::kNormalize, r.alive.size(), start);
}

void reduce_steps(FeatureTable& t, const ReduceOptions& o, Reduction& r) {
  filter_missing(t, o, r);
  learn_fill(t, o, r);
  transform_step(t, o, r);
  filter_variance(t, o, r);
  if (o.stability.resamples > 0) {
    // The subsets apply --fdr with their own q-values; on all samples the ranking only orders.
    ReduceOptions all_samples = o;
    all_samples.fdr = 1;
    rank_relevance(t, all_samples, r);
    learn_knn_fills(t, o, r);
    select_stable(t, o, r);
    return;
  }
  rank_relevance(t, o, r);
  learn_knn_fills(t, o, r);
  prune_redundant(t, o, r);
  take_top(t, o, r);
}

Reduction reduce(FeatureTable& t, const ReduceOptions& o) {
  Reduction r = start_reduction(t, o);
  filter_floor(t, o, r);
  normalize_step(t, o, r);
  reduce_steps(t, o, r);
  return r;
}

namespace {

void append_tab_number(std::string& out, double v) {
  out += '\t';
  internal::append_number(out, v);
}

// The fraction of the stability subsets that kept input feature j; NaN for one dropped before
// relevance (it entered none).
double stability_of(const Reduction& r, std::size_t j) {
  const Decision& d = r.decisions[j];
  if (!d.kept && (d.step == Step::kMissing || d.step == Step::kVariance)) return kNaN;
  return static_cast<double>(r.stability->kept_in[j]) / static_cast<double>(r.stability->options.resamples);
}

}  // namespace

std::string selection_log_tsv(const FeatureTable& t, const Reduction& r) {
  const bool counts = !r.scores.chi2_counts.empty();
  std::string out = "feature";
  for (const auto& name : t.feature_info_names) {  // --feature-info columns, right after feature
    out += '\t';
    internal::append_field(out, name, '\t');
  }
  out += "\tindex\tstatus\tstep\treason\trank";
  const bool continuous = r.scores.continuous;
  if (r.supervised)
    out += continuous ? "\tpearson_r\tpearson_p\tpearson_q\tspearman_rho\tspearman_p\tspearman_q\tmi"
                      : "\tmi\tchi2\tchi2_p\tchi2_q\tf\tf_p\tf_q";
  if (counts) out += "\tchi2_counts\tchi2_counts_p\tchi2_counts_q";
  out += r.stability ? "\tvariance\tmissing_rate\tstability\n" : "\tvariance\tmissing_rate\n";
  for (std::size_t j = 0; j < r.decisions.size(); ++j) {
    const Decision& d = r.decisions[j];
    internal::append_field(out, t.feature_names[j], '\t');
    for (const auto& column : t.feature_info) {
      out += '\t';
      internal::append_field(out, column[j], '\t');
    }
    out += '\t' + std::to_string(j + 1) + '\t' + (d.kept ? "kept" : "dropped") + '\t' + (d.kept ? "kept" : step_name(d.step)) + '\t';
    internal::append_field(out, d.reason, '\t');
    out += '\t';
    if (d.kept) out += std::to_string(d.rank);
    const std::int64_t pos = r.score_of[j];
    const auto ps = static_cast<std::size_t>(pos);
    if (r.supervised) {
      if (pos >= 0 && continuous) {
        for (double v : {r.scores.pearson_r[ps], r.scores.pearson_p[ps], r.scores.pearson_q[ps],
                         r.scores.spearman_rho[ps], r.scores.spearman_p[ps], r.scores.spearman_q[ps], r.scores.mi[ps]})
          append_tab_number(out, v);
      } else if (pos >= 0) {
        for (double v : {r.scores.mi[ps], r.scores.chi2[ps], r.scores.chi2_p[ps], r.scores.chi2_q[ps],
                         r.scores.f[ps], r.scores.f_p[ps], r.scores.f_q[ps]})
          append_tab_number(out, v);
      } else {
        out += "\tNA\tNA\tNA\tNA\tNA\tNA\tNA";
      }
    }
    if (counts) {
      if (pos >= 0) {
        for (double v : {r.scores.chi2_counts[ps], r.scores.chi2_counts_p[ps], r.scores.chi2_counts_q[ps]}) append_tab_number(out, v);
      } else {
        out += "\tNA\tNA\tNA";
      }
    }
    append_tab_number(out, r.variance[j]);
    append_tab_number(out, r.raw_stats[j].missing_rate());
    if (r.stability) append_tab_number(out, stability_of(r, j));
    out += '\n';
  }
  return out;
}

std::string reduction_ranking_tsv(const FeatureTable& t, const Reduction& r) {
  std::vector<double> stability;
  if (r.stability)
    for (const std::int64_t j : r.kept) stability.push_back(stability_of(r, static_cast<std::size_t>(j)));
  if (r.supervised) {
    std::vector<std::size_t> order;
    order.reserve(r.kept.size());
    for (const std::int64_t j : r.kept) order.push_back(static_cast<std::size_t>(r.score_of[static_cast<std::size_t>(j)]));
    return ranking_tsv(r.scores, order, t.feature_names, !r.scores.chi2_counts.empty(), t.feature_info_names,
                       t.feature_info, stability);
  }
  std::string out = "rank\tfeature";
  for (const auto& name : t.feature_info_names) {
    out += '\t';
    internal::append_field(out, name, '\t');
  }
  out += r.stability ? "\tvariance\tmissing_rate\tindex\tstability\n" : "\tvariance\tmissing_rate\tindex\n";
  for (std::size_t k = 0; k < r.kept.size(); ++k) {
    const auto j = static_cast<std::size_t>(r.kept[k]);
    out += std::to_string(k + 1) + '\t';
    internal::append_field(out, t.feature_names[j], '\t');
    for (const auto& column : t.feature_info) {
      out += '\t';
      internal::append_field(out, column[j], '\t');
    }
    append_tab_number(out, r.variance[j]);
    append_tab_number(out, r.raw_stats[j].missing_rate());
    out += '\t' + std::to_string(j + 1);
    if (r.stability) append_tab_number(out, stability[k]);
    out += '\n';
  }
  return out;
}

const char* reduced_file_name(char delimiter) { return delimiter == '\t' ? "reduced.tsv" : "reduced.csv"; }

std::string reduced_matrix_text(const FeatureTable& t, const std::vector<std::int64_t>& columns,
                                const std::vector<std::string>& names) {
  std::string out;
  write_reduced_matrix(t, columns, names, [&](std::string_view piece) { out += piece; });
  return out;
}

void write_reduced_matrix(const FeatureTable& t, const std::vector<std::int64_t>& columns,
                          const std::vector<std::string>& names,
                          const std::function<void(std::string_view)>& sink) {
  // Lines per group: 16; on disk for rows=samples 32, so fewer sweeps gather the matrix, with one
  // round of groups formatted while the last is written: 2 x threads x 32 lines of text, as the
  // reader holds.
  const bool spilled = internal::any_on_disk();
  const Eigen::Index group_lines = spilled && t.layout == Layout::kRowsAreSamples ? 32 : 16;
  const char d = t.delimiter;
  const Eigen::Index n = t.values.rows();
  const auto k = static_cast<Eigen::Index>(columns.size());
  const bool by_sample = t.layout == Layout::kRowsAreSamples;
  // Ids and numbers only, in both layouts: the file loads as a numeric table with the ids as row
  // names in one read call; labels and other per-sample facts are in samples.tsv.
  std::string header;
  internal::append_field(header, t.id_name.empty() ? (by_sample ? "sample" : "feature") : t.id_name, d);
  for (const auto& name : by_sample ? names : t.sample_ids) {
    header += d;
    internal::append_field(header, name, d);
  }
  header += '\n';
  sink(header);

  // Lines are formatted in parallel, a group of lines per task, straight into reused buffers
  // (numbers by internal::write_numbers, nothing appended through std::string), and a round of
  // groups is handed to `sink` on another thread while the next round is formatted. For
  // rows=samples a group's values are first gathered row-major from the column-major matrix, a
  // group's run of contiguous floats (one or two cache lines) per column.
  const Eigen::Index lines = by_sample ? n : k;
  const Eigen::Index groups = (lines + group_lines - 1) / group_lines;
  const int threads = internal::thread_count(0);
  const Eigen::Index batch = (spilled ? 1 : 2) * static_cast<Eigen::Index>(threads);  // groups per round
  struct Text {
    internal::GrowableBuffer memory;
    std::size_t size = 0;
  };
  std::vector<Text> texts(static_cast<std::size_t>(2 * batch));  // two rounds: one formatted, one written
  const bool on_disk = internal::any_on_disk();
  // On disk, the output positions in the order of their column indices.
  const std::vector<std::size_t> file_order =
      on_disk && by_sample ? internal::file_order(columns) : std::vector<std::size_t>();
  auto format_group = [&](Eigen::Index group, Text& text) {
    text.size = 0;
    auto room = [&](std::size_t bytes) {
      if (text.size + bytes > text.memory.capacity()) text.memory.reserve(2 * (text.size + bytes));
      return text.memory.data() + text.size;
    };
    auto put_field = [&](std::string_view field) {
      std::string piece;
      internal::append_field(piece, field, d);
      std::memcpy(room(piece.size()), piece.data(), piece.size());
      text.size += piece.size();
    };
    // One line of `count` numbers after its first field, all values written with a delimiter first.
    auto put_numbers = [&](const float* x, Eigen::Index count, Eigen::Index step) {
      char* p = room(static_cast<std::size_t>(count) * (internal::kNumberRoom + 1));
      text.size += static_cast<std::size_t>(internal::write_numbers(p, x, count, step, d) - p);
    };
    const Eigen::Index begin = group * group_lines, end = std::min(lines, begin + group_lines);
    if (by_sample) {
      const Eigen::Index rows = end - begin;
      thread_local std::vector<float> block;  // rows x k, row-major
      block.resize(static_cast<std::size_t>(rows * k));
      if (on_disk) {
        // On disk, columns are gathered in file order and a 2 MiB window is given back when the
        // walk leaves it (in rank order nearly every column would map and drop a whole window).
        internal::WindowWalk walk(static_cast<std::size_t>(rows) * sizeof(float));
        for (Eigen::Index o = 0; o < k; ++o) {
          const auto c = static_cast<Eigen::Index>(file_order[static_cast<std::size_t>(o)]);
          const float* x = t.values.col(columns[static_cast<std::size_t>(c)]).data() + begin;
          for (Eigen::Index i = 0; i < rows; ++i) block[static_cast<std::size_t>(i * k + c)] = x[i];
          walk.visited(x);
        }
      } else {
        // In memory the columns come in rank order, from all over the matrix, so each run is a
        // cache miss: the runs a tile ahead are fetched while this tile is copied, and a tile is
        // written row by row (8 floats at a time rather than one float into each of 16 rows).
        // Several columns at a time: about 4x faster than one (performance.md).
        constexpr Eigen::Index kTile = 8, kAhead = 16;
        for (Eigen::Index c0 = 0; c0 < k; c0 += kTile) {
          const Eigen::Index c1 = std::min(k, c0 + kTile);
          for (Eigen::Index c = c0 + kAhead; c < std::min(k, c1 + kAhead); ++c) {
            const float* ahead = t.values.col(columns[static_cast<std::size_t>(c)]).data() + begin;
            __builtin_prefetch(ahead);
            __builtin_prefetch(ahead + rows - 1);
          }
          const float* from[kTile];
          for (Eigen::Index c = c0; c < c1; ++c)
            from[c - c0] = t.values.col(columns[static_cast<std::size_t>(c)]).data() + begin;
          for (Eigen::Index i = 0; i < rows; ++i) {
            float* to = block.data() + i * k + c0;
            for (Eigen::Index c = 0; c < c1 - c0; ++c) to[c] = from[c][i];
          }
        }
      }
      for (Eigen::Index i = 0; i < rows; ++i) {
        put_field(t.sample_ids[static_cast<std::size_t>(begin + i)]);
        put_numbers(block.data() + i * k, k, 1);
        *room(1) = '\n';
        ++text.size;
      }
    } else {
      for (Eigen::Index c = begin; c < end; ++c) {
        put_field(names[static_cast<std::size_t>(c)]);
        const float* x = t.values.col(columns[static_cast<std::size_t>(c)]).data();
        put_numbers(x, n, 1);
        *room(1) = '\n';
        ++text.size;
        if (on_disk) internal::release_column_span(t.values, columns[static_cast<std::size_t>(c)], columns[static_cast<std::size_t>(c)]);
      }
    }
  };
  std::future<void> writing;
  for (Eigen::Index first = 0, round = 0; first < groups; first += batch, ++round) {
    const Eigen::Index count = std::min(batch, groups - first);
    Text* const set = texts.data() + (round % 2) * batch;
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads)
    for (Eigen::Index g = 0; g < count; ++g) format_group(first + g, set[g]);
    if (writing.valid()) writing.get();  // the previous round is written; its buffers are free
    writing = std::async(std::launch::async, [&sink, set, count] {
      for (Eigen::Index g = 0; g < count; ++g) sink(std::string_view(set[g].memory.data(), set[g].size));
    });
  }
  if (writing.valid()) writing.get();
}

}  // namespace pare
