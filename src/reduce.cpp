#include "pare/reduce.h"

#include <algorithm>  // std::nth_element, std::stable_sort
#include <chrono>     // std::chrono::steady_clock
#include <cmath>      // std::log2, std::isnan, std::sqrt
#include <cstdio>     // std::snprintf
#include <cstring>    // std::memcpy
#include <future>     // std::async
#include <limits>     // std::numeric_limits
#include <numeric>    // std::iota

#include "internal/buffer.h"
#include "internal/criterion_facts.h"
#include "internal/format.h"
#include "internal/omp.h"
#include "internal/spill.h"
#include "pare/error.h"

namespace pare {

namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

std::string g3(double v) {
  char buffer[32];
  std::snprintf(buffer, sizeof buffer, "%.3g", v);
  return buffer;
}

class Timer {
 public:
  double lap() {
    const auto now = std::chrono::steady_clock::now();
    const double s = std::chrono::duration<double>(now - last_).count();
    last_ = now;
    return s;
  }

 private:
  std::chrono::steady_clock::time_point last_ = std::chrono::steady_clock::now();
};

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
  throw_usage_error("--impute " + name + " is not one of mean, median, zero");
}

const char* impute_name(Impute i) {
  return i == Impute::kMean ? "mean" : i == Impute::kMedian ? "median" : "zero";
}

float transform_value(float x, bool log2) {
  return log2 ? static_cast<float>(std::log2(static_cast<double>(x) + 1.0)) : x;
}

void check_reduce_options(const ReduceOptions& o) {
  if (!(o.drop_missing_above >= 0 && o.drop_missing_above <= 1))
    throw_usage_error("--drop-missing-above must be between 0 and 1 (a fraction of the samples)");
  if (!(o.min_variance >= 0)) throw_usage_error("--min-variance must be 0 or more");
  if (!(o.drop_low_variance >= 0 && o.drop_low_variance < 1))
    throw_usage_error("--drop-low-variance must be at least 0 and below 1");
  if (!(o.fdr > 0 && o.fdr <= 1)) throw_usage_error("--fdr must be in (0, 1]", "a q-value threshold such as 0.05");
  if (o.keep < 0) throw_usage_error("--keep must be 0 (all) or more");
  if (!(o.max_corr > 0 && o.max_corr <= 1))
    throw_usage_error("--max-corr must be above 0 and at most 1", "an |r| limit such as 0.9; --no-prune skips the step");
  if (o.score.bins < 2) throw_usage_error("--bins must be 2 or more");
  if (o.score.neighbors < 1) throw_usage_error("--neighbors must be 1 or more");
  if (o.threads < 0) throw_usage_error("--threads must be 0 (all cores) or more");
  if (o.fdr < 1 && o.rank_by == Criterion::kVariance)
    throw_usage_error("--fdr needs a criterion with a test, and variance has none",
                      "rank by mi, chi2, chi2-counts or f, or leave out --fdr");
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
                                         "), so --log2 cannot apply (leave out --log2, or transform it yourself)");
}

void require_some_scored(const FeatureScores& s, Criterion c, const std::string& source) {
  for (std::size_t i = 0; i < s.size(); ++i)
    if (criterion_defined(s, c, i)) return;
  throw Error(ErrorKind::kInput,
              source + ": no feature could be scored by " + criterion_name(c) + " (" + std::to_string(s.size()) +
                  " features: constant, or " + (c == Criterion::kF ? "with no more observed values than classes" : "too few observed values") +
                  "), so a ranking would be the input order (check the labels and the data, or rank by another criterion)");
}

Reduction reduce(FeatureTable& t, const ReduceOptions& o) {
  const Eigen::Index n = t.values.rows();
  const auto p = static_cast<std::int64_t>(t.values.cols());
  const int threads = internal::thread_count(o.threads);
  Reduction r;
  r.decisions.resize(static_cast<std::size_t>(p));
  r.variance.assign(static_cast<std::size_t>(p), kNaN);
  r.score_of.assign(static_cast<std::size_t>(p), -1);
  r.fill.assign(static_cast<std::size_t>(p), std::numeric_limits<float>::quiet_NaN());
  r.supervised = o.relevance && t.has_labels();
  r.criterion = r.supervised ? o.rank_by : Criterion::kVariance;
  check_reduce_options(o);
  auto drop = [&](std::int64_t j, const char* step, std::string reason) {
    Decision& d = r.decisions[static_cast<std::size_t>(j)];
    d.step = step;
    d.reason = std::move(reason);
  };
  Timer timer;

  // 1. missing filter
  r.raw_stats = compute_column_stats(t.values, threads);
  std::vector<std::int64_t> alive;
  alive.reserve(static_cast<std::size_t>(p));
  for (std::int64_t j = 0; j < p; ++j) {
    const double rate = r.raw_stats[static_cast<std::size_t>(j)].missing_rate();
    if (o.missing_filter && rate > o.drop_missing_above)
      drop(j, "missing", "missing rate " + g3(rate) + " > " + g3(o.drop_missing_above));
    else
      alive.push_back(j);
  }
  r.steps.push_back({"missing", p, static_cast<std::int64_t>(alive.size()), timer.lap()});

  // 2. imputation: learn the fill values now (raw scale). The cells are filled after scoring:
  // the variance filter and the scores use each feature's observed cells only (as documented),
  // and correlations and PCA use the filled values.
  {
    std::vector<std::vector<float>> scratch(static_cast<std::size_t>(threads));
    auto learn = [&](std::size_t a) {
      const std::int64_t j = alive[a];
      const ColumnStats& s = r.raw_stats[static_cast<std::size_t>(j)];
      float fill = 0.0f;
      if (s.n > 0 && o.impute == Impute::kMean) fill = static_cast<float>(s.mean);
      if (s.n > 0 && o.impute == Impute::kMedian)
        fill = median_of_observed(t.values.col(j).data(), n, scratch[static_cast<std::size_t>(omp_get_thread_num())]);
      r.fill[static_cast<std::size_t>(j)] = fill;
    };
    if (o.impute == Impute::kMedian) {
      internal::for_each_column(t.values, alive, threads, learn);
    } else {
      for (std::size_t a = 0; a < alive.size(); ++a) learn(a);  // no cell is read
    }
  }
  const auto n_alive = static_cast<std::int64_t>(alive.size());
  r.steps.push_back({"impute", n_alive, n_alive, timer.lap()});

  // 3. transform
  if (o.log2) {
    for (const std::int64_t j : alive)
      if (r.raw_stats[static_cast<std::size_t>(j)].n > 0 && r.raw_stats[static_cast<std::size_t>(j)].min < 0)
        throw Error(ErrorKind::kInput, t.source + ": feature " + t.feature_names[static_cast<std::size_t>(j)] +
                                           " has negative values (min " + g3(r.raw_stats[static_cast<std::size_t>(j)].min) +
                                           "), so --log2 cannot apply (leave out --log2, or transform it yourself)");
    internal::for_each_column(t.values, alive, threads, [&](std::size_t a) {
      float* x = t.values.col(alive[a]).data();
      for (Eigen::Index i = 0; i < n; ++i)
        if (!std::isnan(x[i])) x[i] = transform_value(x[i], true);
    });
  }
  r.steps.push_back({"transform", n_alive, n_alive, timer.lap()});

  // 4. variance filter, on the observed transformed values (their statistics are kept, by
  // column, for scoring)
  std::vector<ColumnStats> current(static_cast<std::size_t>(p));
  {
    std::vector<ColumnStats> stats(alive.size());
    if (o.log2) {
      internal::for_each_column(t.values, alive, threads, [&](std::size_t a) {
        stats[a] = column_stats(std::span<const float>(t.values.col(alive[a]).data(), static_cast<std::size_t>(n)));
      });
    } else {
      for (std::size_t a = 0; a < alive.size(); ++a) stats[a] = r.raw_stats[static_cast<std::size_t>(alive[a])];
    }
    std::vector<std::int64_t> next;
    for (std::size_t a = 0; a < alive.size(); ++a) {
      const std::int64_t j = alive[a];
      current[static_cast<std::size_t>(j)] = stats[a];
      const double v = stats[a].variance;
      r.variance[static_cast<std::size_t>(j)] = v;
      if (!o.variance_filter) {
        next.push_back(j);
      } else if (std::isnan(v)) {
        drop(j, "variance", "fewer than 2 observed values");
      } else if (v < o.min_variance) {
        drop(j, "variance", "variance " + g3(v) + " < " + g3(o.min_variance));
      } else {
        next.push_back(j);
      }
    }
    if (o.variance_filter && o.drop_low_variance > 0 && !next.empty()) {
      std::vector<std::int64_t> by_variance = next;
      std::stable_sort(by_variance.begin(), by_variance.end(), [&](std::int64_t a, std::int64_t b) {
        return r.variance[static_cast<std::size_t>(a)] < r.variance[static_cast<std::size_t>(b)];
      });
      const auto cut = static_cast<std::size_t>(o.drop_low_variance * static_cast<double>(by_variance.size()));
      if (cut > 0) {
        const double boundary = r.variance[static_cast<std::size_t>(by_variance[cut - 1])];
        std::vector<char> gone(static_cast<std::size_t>(p), 0);
        for (std::size_t k = 0; k < cut; ++k) {
          const std::int64_t j = by_variance[k];
          gone[static_cast<std::size_t>(j)] = 1;
          drop(j, "variance",
               "variance " + g3(r.variance[static_cast<std::size_t>(j)]) + " in the lowest " +
                   g3(100 * o.drop_low_variance) + "% (cut at " + g3(boundary) + ")");
        }
        std::erase_if(next, [&](std::int64_t j) { return gone[static_cast<std::size_t>(j)] != 0; });
      }
    }
    r.steps.push_back({"variance", n_alive, static_cast<std::int64_t>(next.size()), timer.lap()});
    alive.swap(next);
  }

  // 5. relevance: score and rank (or rank by variance without labels), then the --fdr filter
  std::vector<std::int64_t> ordered;
  if (r.supervised && !alive.empty()) {
    const ClassCodes classes = encode_classes(t.labels);
    ScoreOptions so = o.score;
    so.threads = o.threads;
    so.counts_chi2 = o.rank_by == Criterion::kChi2Counts;
    std::vector<ColumnStats> alive_stats(alive.size());
    for (std::size_t a = 0; a < alive.size(); ++a) alive_stats[a] = current[static_cast<std::size_t>(alive[a])];
    r.scores = score_features(t.values, alive, classes, so, alive_stats);
    require_some_scored(r.scores, r.criterion, t.source);
    for (const std::size_t pos : rank_order(r.scores, r.criterion)) {
      const std::int64_t j = r.scores.feature[pos];
      r.score_of[static_cast<std::size_t>(j)] = static_cast<std::int64_t>(pos);
      const double q = criterion_q(r.scores, r.criterion, pos);
      if (o.fdr < 1 && r.criterion != Criterion::kVariance && q > o.fdr)
        drop(j, "relevance", std::string(internal::criterion_facts(r.criterion).short_test) + " q = " + g3(q) + " > " + g3(o.fdr));
      else
        ordered.push_back(j);
    }
  } else if (!o.relevance) {
    ordered = alive;  // no ranking asked for: input order
  } else {
    ordered = alive;
    std::stable_sort(ordered.begin(), ordered.end(), [&](std::int64_t a, std::int64_t b) {
      return r.variance[static_cast<std::size_t>(a)] > r.variance[static_cast<std::size_t>(b)];
    });
  }
  r.steps.push_back({"relevance", static_cast<std::int64_t>(alive.size()),
                     static_cast<std::int64_t>(ordered.size()), timer.lap()});

  // Fill the gaps of the candidates (transformed fill value, as apply will compute it).
  internal::for_each_column(t.values, ordered, threads, [&](std::size_t a) {
    const std::int64_t j = ordered[a];
    const float fill = transform_value(r.fill[static_cast<std::size_t>(j)], o.log2);
    float* x = t.values.col(j).data();
    for (Eigen::Index i = 0; i < n; ++i)
      if (std::isnan(x[i])) x[i] = fill;
  });

  // 6. redundancy
  std::vector<std::int64_t> survivors;
  std::vector<std::int64_t> unexamined;
  if (o.prune) {
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
        survivors.push_back(j);
      } else if (static_cast<std::int64_t>(i) >= pr.examined) {
        unexamined.push_back(j);
      } else {
        const auto partner = static_cast<std::size_t>(pr.partner[i]);
        char buffer[32];
        std::snprintf(buffer, sizeof buffer, "%.3f", std::abs(pr.r[i]));
        drop(j, "redundancy",
             "|r| = " + std::string(buffer) + " with " + t.feature_names[static_cast<std::size_t>(ordered[partner])] +
                 " (kept, rank " + std::to_string(kept_rank[partner]) + ")");
        r.decisions[static_cast<std::size_t>(j)].partner = ordered[partner];
      }
    }
  } else {
    survivors = ordered;
  }
  r.steps.push_back({"redundancy", static_cast<std::int64_t>(ordered.size()),
                     static_cast<std::int64_t>(survivors.size() + unexamined.size()), timer.lap()});

  // 7. top K
  const std::int64_t before_top = static_cast<std::int64_t>(survivors.size() + unexamined.size());
  for (std::size_t i = 0; i < survivors.size(); ++i) {
    const std::int64_t j = survivors[i];
    if (o.keep > 0 && static_cast<std::int64_t>(i) >= o.keep) {
      drop(j, "top", "rank " + std::to_string(i + 1) + (o.prune ? " after pruning" : "") + "; --keep " +
                         std::to_string(o.keep));
      continue;
    }
    r.kept.push_back(j);
  }
  for (const std::int64_t j : unexamined)
    drop(j, "top", "not reached: the first " + std::to_string(o.keep) + " were already kept (--keep " +
                       std::to_string(o.keep) + "), so it was not compared for redundancy");
  r.steps.push_back({"top", before_top, static_cast<std::int64_t>(r.kept.size()), timer.lap()});

  if (r.kept.empty()) {
    std::string counts;
    for (const auto& s : r.steps) counts += (counts.empty() ? "" : ", ") + s.name + " " + std::to_string(s.out);
    throw Error(ErrorKind::kInput, t.source + ": every feature was filtered out (left after each step: " + counts +
                                       "); loosen the thresholds, e.g. --drop-missing-above, --min-variance, --fdr");
  }

  // Kept features: their rank, and the centre and scale of the transformed, filled column.
  r.center.resize(r.kept.size());
  r.scale.resize(r.kept.size());
  internal::for_each_column(t.values, r.kept, threads, [&](std::size_t k) {
    float* x = t.values.col(r.kept[k]).data();
    const ColumnStats s = column_stats(std::span<const float>(x, static_cast<std::size_t>(n)));
    r.center[k] = s.mean;
    r.scale[k] = s.n >= 2 && s.variance > 0 ? std::sqrt(s.variance) : 1.0;
    if (o.scale)
      for (Eigen::Index i = 0; i < n; ++i)
        x[i] = static_cast<float>((static_cast<double>(x[i]) - r.center[k]) / r.scale[k]);
  });
  for (std::size_t k = 0; k < r.kept.size(); ++k) {
    Decision& d = r.decisions[static_cast<std::size_t>(r.kept[k])];
    d.kept = true;
    d.step = "kept";
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
  r.steps.back().seconds += timer.lap();
  return r;
}

namespace {

void append_tab_number(std::string& out, double v) {
  out += '\t';
  internal::append_number(out, v);
}

}  // namespace

std::string selection_log_tsv(const FeatureTable& t, const Reduction& r) {
  const bool counts = !r.scores.counts.empty();
  std::string out = "feature";
  for (const auto& name : t.feature_info_names) {  // --feature-info columns, right after feature
    out += '\t';
    internal::append_field(out, name, '\t');
  }
  out += "\tindex\tstatus\tstep\treason\trank";
  if (r.supervised) out += "\tmi\tchi2\tchi2_p\tchi2_q\tf\tf_p\tf_q";
  if (counts) out += "\tchi2_counts\tchi2_counts_p\tchi2_counts_q";
  out += "\tvariance\tmissing_rate\n";
  for (std::size_t j = 0; j < r.decisions.size(); ++j) {
    const Decision& d = r.decisions[j];
    internal::append_field(out, t.feature_names[j], '\t');
    for (const auto& column : t.feature_info) {
      out += '\t';
      internal::append_field(out, column[j], '\t');
    }
    out += '\t' + std::to_string(j + 1) + '\t' + (d.kept ? "kept" : "dropped") + '\t' + d.step + '\t';
    internal::append_field(out, d.reason, '\t');
    out += '\t';
    if (d.kept) out += std::to_string(d.rank);
    const std::int64_t pos = r.score_of[j];
    const auto ps = static_cast<std::size_t>(pos);
    if (r.supervised) {
      if (pos >= 0) {
        for (double v : {r.scores.mi[ps], r.scores.chi2[ps], r.scores.chi2_p[ps], r.scores.chi2_q[ps],
                         r.scores.f[ps], r.scores.f_p[ps], r.scores.f_q[ps]})
          append_tab_number(out, v);
      } else {
        out += "\tNA\tNA\tNA\tNA\tNA\tNA\tNA";
      }
    }
    if (counts) {
      if (pos >= 0) {
        for (double v : {r.scores.counts[ps], r.scores.counts_p[ps], r.scores.counts_q[ps]}) append_tab_number(out, v);
      } else {
        out += "\tNA\tNA\tNA";
      }
    }
    append_tab_number(out, r.variance[j]);
    append_tab_number(out, r.raw_stats[j].missing_rate());
    out += '\n';
  }
  return out;
}

std::string reduction_ranking_tsv(const FeatureTable& t, const Reduction& r) {
  if (r.supervised) {
    std::vector<std::size_t> order;
    order.reserve(r.kept.size());
    for (const std::int64_t j : r.kept) order.push_back(static_cast<std::size_t>(r.score_of[static_cast<std::size_t>(j)]));
    return ranking_tsv(r.scores, order, t.feature_names, !r.scores.counts.empty(), t.feature_info_names,
                       t.feature_info);
  }
  std::string out = "rank\tfeature";
  for (const auto& name : t.feature_info_names) {
    out += '\t';
    internal::append_field(out, name, '\t');
  }
  out += "\tvariance\tmissing_rate\tindex\n";
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
    out += '\t' + std::to_string(j + 1) + '\n';
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
        // About 4x faster than one column at a time (1.8 against 7 ns a value, one thread).
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
