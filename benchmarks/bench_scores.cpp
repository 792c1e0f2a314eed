// Cost per feature of each score on a synthetic n x p matrix with two classes (not run by CI).
//
//   build/bench/bench_scores [n=1000] [p=50000] [threads=2] [binned]
//
// With `binned` only the binned set is timed, the fastest of five runs (for profiling it alone).
//
// Prints, for each estimator, the wall time of score_features over all p features and the cost per
// feature. The binned scores (MI and chi-square share one sort and one table; F and the variance
// come with them) are one pass; the kNN MI and the counts chi-square are timed as what they add.
#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <numeric>
#include <string>

#include "internal/random.h"
#include "pare/ranking.h"

namespace {

double time_scores(const pare::Matrix& m, const std::vector<std::int64_t>& features,
                   const pare::ClassCodes& classes, const pare::ScoreOptions& options) {
  const auto start = std::chrono::steady_clock::now();
  const pare::FeatureScores s = pare::score_features(m, features, classes, options);
  const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  if (s.size() != features.size()) std::abort();
  return seconds;
}

}  // namespace

int main(int argc, char** argv) {
  const long n = argc > 1 ? std::atol(argv[1]) : 1000;
  const long p = argc > 2 ? std::atol(argv[2]) : 50000;
  const int threads = argc > 3 ? std::atoi(argv[3]) : 2;
  const bool binned_only = argc > 4 && std::string(argv[4]) == "binned";
  pare::internal::Rng rng(1);
  std::vector<std::string> labels(static_cast<std::size_t>(n));
  for (long i = 0; i < n; ++i) labels[static_cast<std::size_t>(i)] = i % 3 == 0 ? "a" : "b";
  const pare::ClassCodes classes = pare::encode_classes(labels);
  pare::Matrix m(n, p);
  for (long j = 0; j < p; ++j) {
    const double shift = j % 100 == 0 ? 0.8 : 0.0;  // 1% of the features carry signal
    for (long i = 0; i < n; ++i)
      m(i, j) = static_cast<float>(std::exp(rng.normal() * 0.5 + shift * (i % 3 == 0)) * 10.0);
  }
  std::vector<std::int64_t> features(static_cast<std::size_t>(p));
  std::iota(features.begin(), features.end(), 0);

  pare::ScoreOptions binned;
  binned.threads = threads;
  pare::ScoreOptions counts = binned;
  counts.counts_chi2 = true;
  pare::ScoreOptions knn = binned;
  knn.mi = pare::MiEstimator::kKnn;

  std::printf("bench_scores: %ld samples x %ld features, 2 classes, %d threads\n", n, p, threads);
  std::printf("%-44s %10s %14s %14s\n", "scores", "seconds", "us/feature", "features/s");
  double t_binned = time_scores(m, features, classes, binned);
  for (int again = 1; binned_only && again < 5; ++again)
    t_binned = std::min(t_binned, time_scores(m, features, classes, binned));
  auto row = [&](const char* name, double seconds) {
    std::printf("%-44s %10.3f %14.2f %14.0f\n", name, seconds, 1e6 * seconds / static_cast<double>(p),
                static_cast<double>(p) / seconds);
  };
  row("binned MI + chi-square + F + variance", t_binned);
  if (binned_only) return 0;
  row("  + counts chi-square", time_scores(m, features, classes, counts));
  row("kNN MI (k=3) + chi-square + F + variance", time_scores(m, features, classes, knn));
  return 0;
}
