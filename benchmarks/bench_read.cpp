// Reading throughput of a text matrix, with and without the SHA-256 of the file (not run by CI).
//
//   build/bench/benchmarks/bench_read FILE [label=""] [threads=2] [repeats=3]
//
// Times, fastest of `repeats` each: read_table alone, the SHA-256 alone, and load_data (the two
// together, as every command runs them). MB = 10^6 bytes of file. Warm the page cache first (a
// first run does); on a busy machine wall times mean little.
#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <functional>
#include <string>

#include "pare/io.h"
#include "pare/load.h"

#include "internal/sha256.h"

namespace {

double fastest(int repeats, const std::function<void()>& run) {
  double best = 1e300;
  for (int r = 0; r < repeats; ++r) {
    const auto start = std::chrono::steady_clock::now();
    run();
    best = std::min(
        best, std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count());
  }
  return best;
}

}  // namespace

int main(int argc, char** argv) {
  if (argc < 2) {
    std::fprintf(stderr, "usage: bench_read FILE [label] [threads=2] [repeats=3]\n");
    return 2;
  }
  const std::string path = argv[1];
  const std::string label = argc > 2 ? argv[2] : "";
  const int threads = argc > 3 ? std::atoi(argv[3]) : 2;
  const int repeats = argc > 4 ? std::atoi(argv[4]) : 3;
  const double mb = static_cast<double>(std::filesystem::file_size(path)) / 1e6;

  pare::DataRequest request;
  request.path = path;
  request.read.label_column = label;
  request.read.threads = threads;
  std::size_t cells = 0;
  const double parse = fastest(repeats, [&] {
    const pare::FeatureTable t = pare::read_table(path, request.read);
    cells = static_cast<std::size_t>(t.n_samples() * t.n_features());
  });
  const double hash = fastest(repeats, [&] { (void)pare::internal::sha256_file(path); });
  request.hash = true;
  const double both = fastest(repeats, [&] { (void)pare::load_data(request); });
  std::printf("bench_read: %s, %.1f MB, %zu values, %d threads\n", path.c_str(), mb, cells,
              threads);
  std::printf("%-28s %8s %8s\n", "", "seconds", "MB/s");
  std::printf("%-28s %8.3f %8.0f\n", "read_table", parse, mb / parse);
  std::printf("%-28s %8.3f %8.0f\n", "SHA-256", hash, mb / hash);
  std::printf("%-28s %8.3f %8.0f\n", "load_data (read + SHA-256)", both, mb / both);
}
