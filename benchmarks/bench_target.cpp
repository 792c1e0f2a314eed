// Cost per feature of the scores against a continuous target on a synthetic n x p matrix (not run
// by CI).
//
//   build/bench/bench_target [n=1000] [p=50000] [threads=2] [k=3]
//
// Prints the wall and processor time of score_against_target over all p features (Pearson,
// Spearman and the kNN MI together; the kNN MI is most of it) and the cost per feature, for four
// kinds of data: log-normal values without gaps (the common case), the same with one gap in every
// feature (each feature then scored on its own rows, the target prepared again for them), values
// rounded to one decimal (many tied values, the tie-aware neighbour walk), and the rounded values
// with all below 20 set to 0 (about 90% zeros, as in sparse counts). 1% of the features follow the
// target. On a machine shared with other jobs compare the processor times.
#include <time.h>  // clock_gettime

#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <limits>
#include <numeric>

#include "internal/random.h"
#include "pare/ranking.h"

namespace {

// Processor time of the process (all threads), seconds: on a machine shared with other jobs the
// wall time says little, this says what the work costs.
double cpu_seconds() {
  timespec t{};
  clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &t);
  return static_cast<double>(t.tv_sec) + 1e-9 * static_cast<double>(t.tv_nsec);
}

double time_scores(const pare::Matrix& m, const std::vector<std::int64_t>& features,
                   const std::vector<double>& target, const pare::ScoreOptions& options, double& top_mi,
                   double& cpu) {
  const auto start = std::chrono::steady_clock::now();
  const double cpu_start = cpu_seconds();
  const pare::FeatureScores s = pare::score_against_target(m, features, target, options);
  const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  cpu = cpu_seconds() - cpu_start;
  if (s.size() != features.size()) std::abort();
  top_mi = 0;  // used, so the work cannot be optimised away; also a sanity figure
  for (std::size_t j = 0; j < s.size(); j += 100) top_mi += s.mi[j];
  top_mi /= static_cast<double>((s.size() + 99) / 100);
  return seconds;
}

}  // namespace

int main(int argc, char** argv) {
  const long n = argc > 1 ? std::atol(argv[1]) : 1000;
  const long p = argc > 2 ? std::atol(argv[2]) : 50000;
  const int threads = argc > 3 ? std::atoi(argv[3]) : 2;
  const int k = argc > 4 ? std::atoi(argv[4]) : 3;
  pare::internal::Rng rng(1);
  std::vector<double> target(static_cast<std::size_t>(n));
  for (auto& t : target) t = rng.normal();
  pare::Matrix m(n, p);
  for (long j = 0; j < p; ++j) {
    const double weight = j % 100 == 0 ? 0.8 : 0.0;  // 1% of the features follow the target
    for (long i = 0; i < n; ++i)
      m(i, j) = static_cast<float>(std::exp(0.5 * (rng.normal() + weight * target[static_cast<std::size_t>(i)])) * 10.0);
  }
  std::vector<std::int64_t> features(static_cast<std::size_t>(p));
  std::iota(features.begin(), features.end(), 0);
  pare::ScoreOptions options;
  options.threads = threads;
  options.neighbors = k;

  std::printf("bench_target: %ld samples x %ld features, continuous target, k = %d, %d threads\n", n, p, k, threads);
  std::printf("%-40s %9s %11s %12s %13s %11s\n", "data (Pearson + Spearman + kNN MI)", "seconds", "us/feature",
              "cpu seconds", "cpu us/feat.", "mean MI 1%");
  auto row = [&](const char* name, double seconds, double cpu, double mi) {
    std::printf("%-40s %9.3f %11.2f %12.3f %13.2f %11.4f\n", name, seconds, 1e6 * seconds / static_cast<double>(p),
                cpu, 1e6 * cpu / static_cast<double>(p), mi);
  };
  double mi = 0, cpu = 0;
  const double t_plain = time_scores(m, features, target, options, mi, cpu);
  row("log-normal, no gaps", t_plain, cpu, mi);

  pare::Matrix gaps = m;
  for (long j = 0; j < p; ++j) gaps(static_cast<long>(rng.below(static_cast<std::uint64_t>(n))), j) = std::numeric_limits<float>::quiet_NaN();
  const double t_gaps = time_scores(gaps, features, target, options, mi, cpu);
  row("log-normal, one gap in every feature", t_gaps, cpu, mi);

  pare::Matrix rounded = m;
  for (long j = 0; j < p; ++j)
    for (long i = 0; i < n; ++i) rounded(i, j) = std::round(rounded(i, j) * 10.0f) / 10.0f;
  const double t_rounded = time_scores(rounded, features, target, options, mi, cpu);
  row("log-normal rounded to 0.1 (ties)", t_rounded, cpu, mi);

  pare::Matrix zeros = rounded;
  for (long j = 0; j < p; ++j)
    for (long i = 0; i < n; ++i)
      if (zeros(i, j) < 20.0f) zeros(i, j) = 0.0f;  // about 90% zeros, like sparse counts
  const double t_zeros = time_scores(zeros, features, target, options, mi, cpu);
  row("the same with values below 20 set to 0", t_zeros, cpu, mi);
  return 0;
}
