// The scores of every feature on many subsets of the rows at once (score_subsets, declared in
// include/pare/stability.h): the work of stability selection's resamples.
//
// Each feature's column is visited once for all subsets. Against classes with a binned criterion
// (mi, chi2) the column's observed values are sorted once, and each subset takes its values from
// that order by a pass that skips the rows it lacks (internal::score_class_rows), so a subset costs
// O(n) rather than a sort. The other criteria need no sort (F, the counts chi-square, variance,
// Pearson) or sort the subset itself (Spearman, the kNN MI). Each score is computed exactly as
// score_features / score_against_target on the subset's rows alone would compute it, bit for bit
// (tests/stability_test.cpp), and only the score the ranking needs, with its test's p-value when
// --fdr asks for q-values.
#include <cmath>      // std::abs, std::isnan
#include <exception>  // std::exception_ptr, std::current_exception, std::rethrow_exception

#include "internal/class_scores.h"
#include "internal/columns.h"
#include "internal/omp.h"
#include "internal/target_scores.h"
#include "pare/error.h"
#include "pare/progress.h"
#include "pare/stability.h"

namespace pare {

namespace {

// What one subset needs of the rows, the labels or the target, prepared once.
struct Subset {
  std::span<const std::int64_t> rows;
  std::vector<std::int32_t> position;  // row -> place in rows, or -1 (binned class scores)
  std::vector<int> codes;              // per place: class code
  std::vector<double> target;          // per place: target value
  internal::TargetPrep prep;           // of `target`
};

// Per-thread buffers.
struct Buffers {
  internal::ClassScratch classes;
  internal::TargetScorer target;
  std::vector<std::uint64_t> sorted, buffer;
  std::vector<float> gathered;
};

// The score, p-value and defined bit of `c` from a class result.
void take_class(const internal::ClassResult& r, Criterion c, double& score, double& p, std::uint8_t& defined) {
  switch (c) {
    case Criterion::kMi: score = r.mi, p = r.chi2_p; break;
    case Criterion::kChi2: score = r.chi2, p = r.chi2_p; break;
    case Criterion::kChi2Counts: score = r.counts, p = r.counts_p; break;
    case Criterion::kF: score = r.f, p = r.f_p; break;
    default: score = r.variance, p = 1; break;
  }
  defined = c == Criterion::kVariance || (r.defined & internal::defined_bit(c)) != 0;
}

void take_target(const internal::TargetResult& r, Criterion c, double& score, double& p, std::uint8_t& defined) {
  switch (c) {
    case Criterion::kMi: score = r.mi, p = r.spearman_p; break;
    case Criterion::kPearson: score = std::abs(r.pearson_r), p = r.pearson_p; break;
    case Criterion::kSpearman: score = std::abs(r.spearman_rho), p = r.spearman_p; break;
    default: score = r.variance, p = 1; break;
  }
  defined = c == Criterion::kVariance || (r.defined & internal::defined_bit(c)) != 0;
}

}  // namespace

SubsetScores score_subsets(const ConstMatrixRef& m, std::span<const std::int64_t> features, const FeatureTable& table,
                           std::span<const std::vector<std::int64_t>> subsets, Criterion criterion, bool test,
                           const ScoreOptions& options) {
  const bool by_class = table.has_labels(), by_target = table.has_target();
  const std::size_t count = subsets.size(), p = features.size();
  const Eigen::Index n = m.rows();
  ScoreOptions so = options;
  so.counts_chi2 = criterion == Criterion::kChi2Counts;
  ClassCodes classes;
  if (by_class) classes = encode_classes(table.labels);
  const int k = static_cast<int>(classes.classes.size());
  const internal::ClassWanted class_wanted = internal::wanted_for(criterion, test);
  const internal::TargetWanted target_wanted = internal::target_wanted_for(criterion, test);
  const bool shared_sort = by_class && (class_wanted.table || (class_wanted.mi && so.mi == MiEstimator::kKnn));

  std::vector<Subset> sub(count);
  for (std::size_t b = 0; b < count; ++b) {
    Subset& s = sub[b];
    s.rows = subsets[b];
    if (shared_sort) {
      s.position.assign(static_cast<std::size_t>(n), -1);
      for (std::size_t i = 0; i < s.rows.size(); ++i)
        s.position[static_cast<std::size_t>(s.rows[i])] = static_cast<std::int32_t>(i);
    }
    for (const std::int64_t row : s.rows) {
      if (by_class) s.codes.push_back(classes.codes[static_cast<std::size_t>(row)]);
      if (by_target) s.target.push_back(table.target[static_cast<std::size_t>(row)]);
    }
    if (by_target) {
      s.prep.order = internal::stable_order(s.target);
      internal::prepare_target(s.target, s.prep);
    }
  }

  SubsetScores out;
  out.score.assign(count, std::vector<double>(p, 0.0));
  out.q.assign(count, std::vector<double>(p, 1.0));
  out.defined.assign(count, std::vector<std::uint8_t>(p, 0));
  std::vector<std::vector<double>> p_values(test ? count : 0, std::vector<double>(p, 1.0));
  const int threads = internal::thread_count(options.threads);
  std::vector<Buffers> buffers(static_cast<std::size_t>(threads));
  std::exception_ptr failure;  // an exception must not leave an OpenMP region
  internal::for_each_column(m, features, threads, [&](std::size_t j) {
    try {
      Buffers& bu = buffers[static_cast<std::size_t>(omp_get_thread_num())];
      const float* column = m.col(features[j]).data();
      if (shared_sort) internal::sorted_value_keys(column, n, bu.sorted, bu.buffer);
      for (std::size_t b = 0; b < count; ++b) {
        const Subset& s = sub[b];
        double score = 0, pv = 1;
        std::uint8_t defined = 0;
        if (by_class) {
          const internal::ClassResult r = internal::score_class_rows(column, s.rows, s.position, bu.sorted, s.codes, k,
                                                                     so, bu.classes, class_wanted);
          take_class(r, criterion, score, pv, defined);
        } else {
          bu.gathered.resize(s.rows.size());
          for (std::size_t i = 0; i < s.rows.size(); ++i) bu.gathered[i] = column[s.rows[i]];
          if (by_target) {
            const internal::TargetResult r =
                bu.target.score(bu.gathered.data(), static_cast<std::int64_t>(s.rows.size()), s.prep, s.target,
                                so.neighbors, nullptr, target_wanted);
            take_target(r, criterion, score, pv, defined);
          } else {
            // No labels: ranked by variance, as rank_relevance ranks without them.
            const ColumnStats st = column_stats(std::span<const float>(bu.gathered.data(), bu.gathered.size()));
            score = st.variance;
            defined = 1;
          }
        }
        out.score[b][j] = score;
        out.defined[b][j] = defined;
        if (test) p_values[b][j] = pv;
      }
    } catch (...) {
#pragma omp critical(pare_subset_score_failure)
      if (!failure) failure = std::current_exception();
    }
  });
  if (failure) std::rethrow_exception(failure);
  if (test)
    for (std::size_t b = 0; b < count; ++b) out.q[b] = bh_adjust(p_values[b]);
  return out;
}

}  // namespace pare
