// Stability selection (include/pare/stability.h): the subsets, the selection on each, and the final
// selection by how often a feature was kept.
//
// Work and memory. The steps before relevance (missing, impute, transform, variance) do not
// depend on the class labels and run once on all samples; each subset recomputes the scores
// (score_subsets: one visit of each column for a batch of subsets), ranks them, prunes its top
// candidates and keeps q. The subsets are row-index lists into the one matrix. The pruning of a
// subset copies only its leading candidates' values at its rows (a few hundred columns when q is
// in the hundreds; more are taken, four times as many each time, while fewer than q survive).
// The scores of a batch of subsets are held together: about 25 bytes per feature and subset, the
// batch sized to stay under kBatchBytes.
#include "pare/stability.h"

#include <algorithm>  // std::stable_sort, std::min, std::max
#include <chrono>     // std::chrono::steady_clock
#include <cmath>      // std::ceil, std::isnan, std::llround, std::floor
#include <exception>  // std::exception_ptr, std::current_exception, std::rethrow_exception
#include <limits>     // std::numeric_limits
#include <numeric>    // std::iota

#include "internal/criterion_facts.h"
#include "internal/format.h"
#include "internal/omp.h"
#include "internal/random.h"
#include "pare/error.h"
#include "pare/progress.h"
#include "pare/prune.h"
#include "pare/reduce.h"

namespace pare {

namespace {

// Stream of subset b (or pair b/2): "ST" and the draw, apart from the folds' and the projection's.
constexpr std::uint64_t kStabilityStream = 0x53540000;
constexpr std::size_t kBatchBytes = std::size_t{256} << 20;

std::string g3(double v) {
  std::string out;
  internal::append_rounded(out, v, 3);
  return out;
}

}  // namespace

ResampleScheme parse_resample_scheme(const std::string& name) {
  if (name == "halves") return ResampleScheme::kHalves;
  if (name == "pairs") return ResampleScheme::kPairs;
  throw_usage_error("`resample_scheme` " + name + " is not one of halves, pairs");
}

const char* resample_scheme_name(ResampleScheme scheme) {
  return scheme == ResampleScheme::kPairs ? "pairs" : "halves";
}

void check_stability_options(const StabilityOptions& o, std::int64_t keep) {
  if (o.resamples < 0) throw_usage_error("`resamples` must be 0 (off) or more");
  if (o.resamples == 0) return;
  if (o.resamples < 2) throw_usage_error("`resamples` must be 2 or more", "stability selection usually draws 50 to 100");
  if (!(o.fraction > 0 && o.fraction < 1))
    throw_usage_error("`resample_fraction` must be above 0 and below 1", "half the samples (0.5) is usual");
  if (!(o.min_stability > 0.5 && o.min_stability <= 1))
    throw_usage_error("`min_stability` must be above 0.5 and at most 1",
                      "the bound on false selections needs it above 0.5; 0.6 to 0.9 is usual");
  if (o.scheme == ResampleScheme::kPairs && o.resamples % 2 != 0)
    throw_usage_error("`resample_scheme pairs` needs an even `resamples` (each pair is two subsets)");
  if (o.scheme == ResampleScheme::kPairs && o.fraction != 0.5)
    throw_usage_error("`resample_scheme pairs` splits the samples in halves, so `resample_fraction` must be 0.5");
  if (keep <= 0)
    throw_usage_error("`resamples` needs `keep`: the features each subset keeps (q of the bound)",
                      "100 is usual; the selection is then the features kept often enough");
}

double stability_bound(std::int64_t q, std::int64_t p, double min_stability) {
  if (p <= 0) return 0;
  const auto dq = static_cast<double>(q);
  return dq * dq / ((2 * min_stability - 1) * static_cast<double>(p));
}

std::vector<std::vector<std::int64_t>> draw_resamples(const FeatureTable& t, const StabilityOptions& o,
                                                     std::uint64_t seed) {
  const std::vector<std::vector<std::int64_t>> strata = sample_strata(t);
  std::vector<std::vector<std::int64_t>> subsets;
  subsets.reserve(static_cast<std::size_t>(o.resamples));
  if (o.scheme == ResampleScheme::kHalves) {
    for (std::int64_t b = 0; b < o.resamples; ++b)
      subsets.push_back(stratified_rows(strata, o.fraction, seed, kStabilityStream + static_cast<std::uint64_t>(b) + 1));
    return subsets;
  }
  for (std::int64_t pair = 0; pair < o.resamples / 2; ++pair) {
    internal::Rng rng(seed, kStabilityStream + static_cast<std::uint64_t>(pair) + 1);
    std::vector<std::int64_t> half[2];
    for (const auto& stratum : strata) {
      std::vector<std::int64_t> members = stratum;
      internal::shuffle(members, rng);
      const std::size_t even = members.size() / 2 * 2;
      for (std::size_t i = 0; i < even; ++i) half[i % 2].push_back(members[i]);
      if (even < members.size()) half[half[1].size() < half[0].size() ? 1 : 0].push_back(members.back());
    }
    for (auto& h : half) {
      std::sort(h.begin(), h.end());
      subsets.push_back(std::move(h));
    }
  }
  return subsets;
}

namespace {

// The features one subset keeps: `scored` (input indices, ascending) ranked by the subset's scores
// (score descending, NaN last, ties in input order), cut at --fdr by the subset's q-values, pruned
// for redundancy on the subset's rows and cut at q.
// The fill of the gap in `row`: its kNN fill when there is one, else `fallback`.
float cell_fill(const CellFills* cells, std::int64_t row, float fallback) {
  if (cells == nullptr) return fallback;
  const auto it = std::lower_bound(cells->begin(), cells->end(), row,
                                   [](const auto& cell, std::int64_t r) { return cell.first < r; });
  return it != cells->end() && it->first == row ? it->second : fallback;
}

std::vector<std::int64_t> select_in_subset(const FeatureTable& t, const ReduceOptions& o, const Reduction& r,
                                           std::span<const std::int64_t> scored, std::span<const std::int64_t> rows,
                                           const std::vector<double>& score, const std::vector<double>& q,
                                           const std::vector<float>& fill, bool test) {
  const double lowest = -std::numeric_limits<double>::infinity();
  std::vector<std::size_t> order(scored.size());
  std::iota(order.begin(), order.end(), std::size_t{0});
  auto key = [&](std::size_t i) { return std::isnan(score[i]) ? lowest : score[i]; };
  std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) { return key(a) > key(b); });
  std::vector<std::int64_t> candidates;
  candidates.reserve(order.size());
  for (const std::size_t i : order)
    if (!test || q[i] <= o.fdr) candidates.push_back(scored[i]);
  const auto want = static_cast<std::size_t>(o.keep);
  if (!o.prune) {
    candidates.resize(std::min(candidates.size(), want));
    return candidates;
  }
  // The leading candidates' values at the subset's rows, gaps filled; more of them while fewer
  // than q survive the pruning.
  const auto n = static_cast<Eigen::Index>(rows.size());
  std::size_t width = std::min(candidates.size(), std::max<std::size_t>(4 * want, 256));
  PruneOptions po;
  po.max_corr = o.max_corr;
  po.max_kept = o.keep;
  po.threads = 1;
  Matrix block;
  for (;;) {
    block.resize(n, static_cast<Eigen::Index>(width));
    for (std::size_t c = 0; c < width; ++c) {
      const float* x = t.values.col(candidates[c]).data();
      const float f = fill[static_cast<std::size_t>(candidates[c])];
      float* to = block.col(static_cast<Eigen::Index>(c)).data();
      const CellFills* cells = r.cell_fills.empty() ? nullptr : &r.cell_fills[static_cast<std::size_t>(candidates[c])];
      for (Eigen::Index i = 0; i < n; ++i) {
        const std::int64_t row = rows[static_cast<std::size_t>(i)];
        const float v = x[row];
        to[i] = std::isnan(v) ? cell_fill(cells, row, f) : v;
      }
    }
    std::vector<std::int64_t> positions(width);
    std::iota(positions.begin(), positions.end(), 0);
    const PruneResult pr = prune_correlated(block, positions, po);
    std::vector<std::int64_t> kept;
    for (std::size_t c = 0; c < width && kept.size() < want; ++c)
      if (pr.kept[c]) kept.push_back(candidates[c]);
    if (kept.size() >= want || width == candidates.size()) return kept;
    width = std::min(candidates.size(), 4 * width);
  }
}

// How many subsets kept each input feature: the subsets' scores a batch at a time (score_subsets),
// then each subset's selection (select_in_subset), subsets side by side.
std::vector<std::int32_t> kept_in_subsets(const FeatureTable& t, const ReduceOptions& o, const Reduction& r,
                                          std::span<const std::int64_t> scored,
                                          const std::vector<std::vector<std::int64_t>>& subsets,
                                          const std::vector<float>& fill) {
  const bool test = r.supervised && o.fdr < 1 && r.criterion != Criterion::kVariance;
  ScoreOptions score_options = o.score;
  score_options.threads = o.threads;
  const int threads = internal::thread_count(o.threads);
  const std::size_t per_subset = std::max<std::size_t>(1, 25 * scored.size());
  const std::size_t batch =
      std::min(subsets.size(), std::max<std::size_t>(static_cast<std::size_t>(threads), kBatchBytes / per_subset));
  std::vector<std::int32_t> kept_in(r.decisions.size(), 0);
  ProgressStep progress("stability", static_cast<std::int64_t>(subsets.size()), "subsets");
  for (std::size_t first = 0; first < subsets.size(); first += batch) {
    const std::size_t count = std::min(batch, subsets.size() - first);
    std::span<const std::vector<std::int64_t>> these(subsets.data() + first, count);
    std::vector<std::vector<std::int64_t>> balanced;
    if (o.balance == Balance::kSmallest && t.has_labels()) {
      require_balanceable(t);
      for (std::size_t b = 0; b < count; ++b)
        balanced.push_back(balance_rows(t.labels, these[b], o.seed, kBalanceStream + 1 + first + b));
      these = balanced;
    }
    const SubsetScores scores = score_subsets(t.values, scored, t, these, r.criterion, test, score_options);
    std::vector<std::vector<std::int64_t>> kept(count);
    std::exception_ptr failure;  // an exception must not leave an OpenMP region
#pragma omp parallel num_threads(threads)
    {
      const QuietProgress quiet;
#pragma omp for schedule(dynamic, 1)
      for (std::size_t b = 0; b < count; ++b) {
        try {
          kept[b] = select_in_subset(t, o, r, scored, these[b], scores.score[b], scores.q[b], fill, test);
        } catch (...) {
#pragma omp critical(pare_stability_failure)
          if (!failure) failure = std::current_exception();
        }
        progress.add(1);
      }
    }
    if (failure) std::rethrow_exception(failure);
    for (const auto& k : kept)
      for (const std::int64_t j : k) ++kept_in[static_cast<std::size_t>(j)];
  }
  return kept_in;

}

}  // namespace

void select_stable(FeatureTable& t, const ReduceOptions& o, Reduction& r) {
  const StabilityOptions& so = o.stability;
  check_stability_options(so, o.keep);
  const auto start = std::chrono::steady_clock::now();
  const std::size_t in = r.alive.size();
  // The features entering relevance, in input order (the subsets' ties), and their rank on all
  // samples (r.alive's order).
  std::vector<std::int64_t> scored = r.alive;
  std::sort(scored.begin(), scored.end());
  const std::vector<std::vector<std::int64_t>> subsets = draw_resamples(t, so, o.seed);
  std::vector<float> fill(r.decisions.size(), 0.0f);
  for (const std::int64_t j : scored)
    fill[static_cast<std::size_t>(j)] = transform_value(r.fill[static_cast<std::size_t>(j)], o.log2);

  StabilityRecord rec;
  rec.options = so;
  rec.seed = o.seed;
  rec.q = o.keep;
  rec.p = static_cast<std::int64_t>(in);
  rec.bound = stability_bound(rec.q, rec.p, so.min_stability);
  rec.subset_samples_min = std::numeric_limits<std::int64_t>::max();
  for (const auto& s : subsets) {
    rec.subset_samples_min = std::min(rec.subset_samples_min, static_cast<std::int64_t>(s.size()));
    rec.subset_samples_max = std::max(rec.subset_samples_max, static_cast<std::int64_t>(s.size()));
  }

  rec.kept_in = kept_in_subsets(t, o, r, scored, subsets, fill);

  // Stable enough: kept in at least PI·B subsets (PI·B rounded up, with a margin for its rounding).
  const auto B = static_cast<double>(so.resamples);
  const auto needed = static_cast<std::int32_t>(std::ceil(so.min_stability * B - 1e-9));
  std::vector<std::int64_t> selected;
  for (const std::int64_t j : r.alive) {
    const std::int32_t times = rec.kept_in[static_cast<std::size_t>(j)];
    if (times >= needed) {
      selected.push_back(j);
      continue;
    }
    r.drop(j, Step::kStability,
           "kept in " + std::to_string(times) + " of " + std::to_string(so.resamples) + " subsets (stability " +
               g3(times / B) + " < " + g3(so.min_stability) + ")");
  }
  std::stable_sort(selected.begin(), selected.end(), [&](std::int64_t a, std::int64_t b) {
    return rec.kept_in[static_cast<std::size_t>(a)] > rec.kept_in[static_cast<std::size_t>(b)];
  });
  rec.selected = static_cast<std::int64_t>(selected.size());
  r.alive = std::move(selected);
  const auto seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  r.steps.push_back({Step::kStability, static_cast<std::int64_t>(in), static_cast<std::int64_t>(r.alive.size()), seconds});
  r.stability = std::move(rec);
  if (r.alive.empty()) {
    std::int32_t most = 0;
    for (const std::int32_t times : r.stability->kept_in) most = std::max(most, times);
    throw Error(ErrorKind::kInput,
                t.source + ": no feature was kept in at least " + g3(so.min_stability) + " of the " +
                    std::to_string(so.resamples) + " subsets (the most stable in " + std::to_string(most) +
                    "); lower `min_stability`, raise `keep`, or check that the labels carry signal");
  }

  // On all samples: redundancy among the stable features, then every survivor kept.
  ReduceOptions final_options = o;
  final_options.keep = 0;
  prune_redundant(t, final_options, r);
  take_top(t, final_options, r);
  for (std::size_t k = 0; k < r.kept.size(); ++k) {
    const auto j = static_cast<std::size_t>(r.kept[k]);
    const std::int32_t times = r.stability->kept_in[j];
    const std::int64_t pos = r.score_of[j];
    r.decisions[j].reason = "rank " + std::to_string(k + 1) + ": stability " + g3(times / B) + " (" +
                            std::to_string(times) + " of " + std::to_string(so.resamples) + " subsets), " +
                            criterion_name(r.criterion) + " " +
                            g3(pos >= 0 ? criterion_score(r.scores, r.criterion, static_cast<std::size_t>(pos))
                                        : r.variance[j]) +
                            " on all samples";
  }
}

}  // namespace pare
