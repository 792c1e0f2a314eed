// What the outputs say about each ranking criterion, in one table: its ranking.tsv columns, the
// words of the report and of the selection log. Used by the report and the reduction, so a
// criterion is described the same way everywhere.
#pragma once

#include "pare/ranking.h"

namespace pare::internal {

struct CriterionFacts {
  const char* column;    ///< ranking.tsv column of the score (pearson, spearman: signed; ranked by |r|)
  const char* p_column;  ///< column of the p-value its --fdr test gives ("" for none)
  const char* q_column;  ///< column of that test's q-value ("" for none)
  const char* axis;      ///< the score, as an axis label with units
  const char* test;      ///< the test, in a sentence ("" for none)
  const char* short_test;  ///< the test in a selection-log reason
};

/// The facts of `c` against classes, or against a continuous target when `continuous` (the table
/// follows the order of enum class Criterion; mi and variance differ by the kind of target).
inline const CriterionFacts& criterion_facts(Criterion c, bool continuous = false) {
  static constexpr CriterionFacts kFacts[] = {
      {"mi", "chi2_p", "chi2_q", "mutual information with the class (nats)",
       "the chi-square test of independence on the same bins", "chi-square test"},
      {"chi2", "chi2_p", "chi2_q", "chi-square statistic of bins \xC3\x97 classes",
       "the chi-square test of independence on the same bins", "chi-square test"},
      {"chi2_counts", "chi2_counts_p", "chi2_counts_q", "counts chi-square statistic", "the counts chi-square test",
       "counts chi-square"},
      {"f", "f_p", "f_q", "one-way ANOVA F statistic", "the one-way ANOVA F-test", "F-test"},
      {"variance", "", "", "sample variance", "", "chi-square test"},
      {"pearson_r", "pearson_p", "pearson_q", "|Pearson r| with the target",
       "the t test of Pearson's r (two-sided)", "Pearson test"},
      {"spearman_rho", "spearman_p", "spearman_q", "|Spearman rho| with the target",
       "the t test of Spearman's rho (two-sided)", "Spearman test"},
  };
  static constexpr CriterionFacts kContinuousMi = {"mi", "spearman_p", "spearman_q",
                                                   "mutual information with the target (nats)",
                                                   "the t test of Spearman's rho (two-sided)", "Spearman test"};
  static constexpr CriterionFacts kContinuousVariance = {"variance", "", "", "sample variance", "", "Spearman test"};
  static_assert(static_cast<int>(Criterion::kMi) == 0 && static_cast<int>(Criterion::kChi2) == 1 &&
                static_cast<int>(Criterion::kChi2Counts) == 2 && static_cast<int>(Criterion::kF) == 3 &&
                static_cast<int>(Criterion::kVariance) == 4 && static_cast<int>(Criterion::kPearson) == 5 &&
                static_cast<int>(Criterion::kSpearman) == 6);
  if (continuous && c == Criterion::kMi) return kContinuousMi;
  if (continuous && c == Criterion::kVariance) return kContinuousVariance;
  return kFacts[static_cast<int>(c)];
}

}  // namespace pare::internal
