// Nearest-neighbour imputation (issue 17, item 5): the nan-Euclidean distance of CHECKS.md §11 on a
// hand-computed example, the same fills for any thread count, the training values beside the plan
// guarded by their SHA-256, and apply / folds replaying the fills. The values against scikit-learn's
// KNNImputer are checked in tests/reference/impute_reference.py. Data: Debian's python3-sklearn
// wine data (178 x 13; CHECKS.md §10) with gaps punched at random.
#include <cmath>       // std::isnan
#include <filesystem>  // std::filesystem::exists
#include <fstream>     // std::fstream
#include <limits>      // std::numeric_limits
#include <string>      // std::string
#include <vector>      // std::vector

#include <catch2/catch.hpp>

#include "internal/random.h"
#include "pare/impute.h"
#include "support/cli_run.h"
#include "support/public_data.h"
#include "support/temp_dir.h"

namespace {

using pare::test::TempDir;
constexpr float kGap = std::numeric_limits<float>::quiet_NaN();

// The wine data as a rows=samples CSV with 8% of the cells missing (seeded).
std::string gappy_wine(const TempDir& dir, bool& present) {
  const pare::test::PublicData d = pare::test::read_public("wine_data.csv", 1);
  present = d.present;
  pare::internal::Rng rng(5);
  std::string csv = "sample";
  for (std::size_t j = 0; j < d.p(); ++j) csv += ",f" + std::to_string(j + 1);
  csv += ",class\n";
  for (std::size_t i = 0; i < d.n(); ++i) {
    csv += "s" + std::to_string(i + 1);
    for (const auto& v : d.values[i]) csv += "," + (rng.uniform() < 0.08 ? std::string("NA") : v);
    csv += ",c" + d.classes[i] + "\n";
  }
  return dir.write("wine-gaps.csv", csv);
}

}  // namespace

TEST_CASE("impute: the nan-Euclidean neighbours of a hand-computed example", "[impute]") {
  // CHECKS.md §11: d² = (features / present in both) × Σ over the features present in both.
  // x = (1, ?, 2) against
  //   r0 = (1, ?, 3):   features 0, 2 in common: (0² + 1²) × 3/2 = 1.5, but r0 lacks feature 1
  //   r1 = (2, 2, ?):   feature 0:               1² × 3/1 = 3
  //   r2 = (0, 5, 1):   features 0, 2:           (1² + 1²) × 3/2 = 3   (tie with r1: r1 first)
  //   r3 = (10, 10, 10): (81 + 64) × 3/2 = 217.5
  // k = 2 donors observing feature 1: r1 and r2, fill (2 + 5) / 2 = 3.5; k = 3 adds r3: 17 / 3.
  pare::KnnReference ref;
  ref.features = {"a", "b", "c"};
  ref.values.resize(4, 3);
  ref.values << 1, kGap, 3, 2, 2, kGap, 0, 5, 1, 10, 10, 10;
  pare::Matrix x(1, 3);
  x << 1, kGap, 2;
  const std::vector<std::int64_t> columns{0, 1, 2}, fill{1}, feature{1};
  const std::vector<float> fallback{-1};
  ref.neighbors = 2;
  auto fills = pare::knn_fills(x, columns, ref, fill, feature, fallback, false, 2);
  REQUIRE(fills.size() == 1);
  REQUIRE(fills[0].size() == 1);
  CHECK(fills[0][0].first == 0);
  CHECK(fills[0][0].second == 3.5f);
  ref.neighbors = 3;
  fills = pare::knn_fills(x, columns, ref, fill, feature, fallback, false, 1);
  CHECK(fills[0][0].second == static_cast<float>(17.0 / 3.0));
  // No reference row shares a feature with x: the fallback.
  pare::Matrix lonely(1, 3);
  lonely << kGap, kGap, kGap;
  const std::vector<std::int64_t> fill_a{0}, feature_a{0};
  fills = pare::knn_fills(lonely, columns, ref, fill_a, feature_a, fallback, false, 1);
  CHECK(fills[0][0].second == -1.0f);
}

TEST_CASE("impute: reduce --impute knn is the same for any --threads, and apply replays it", "[impute]") {
  TempDir dir;
  bool present = false;
  const std::string data = gappy_wine(dir, present);
  if (!present) return;
  const std::vector<std::string> base{"reduce", data, "--label", "class", "--impute", "knn", "--keep", "8",
                                      "--log2", "--quiet"};
  auto reduce = [&](const std::string& out, const std::string& threads) {
    std::vector<std::string> args = base;
    args.insert(args.end(), {"--threads", threads, "--out", dir.file(out)});
    return pare::test::run(args);
  };
  REQUIRE(reduce("one", "1").code == 0);
  REQUIRE(reduce("two", "2").code == 0);
  for (const std::string file : {"reduced.csv", "ranking.tsv", "impute-reference.npy"})
    CHECK(TempDir::read(dir.file("one/" + file)) == TempDir::read(dir.file("two/" + file)));
  // The reduced matrix has no gap, and apply on the same file gives it byte for byte.
  CHECK(TempDir::read(dir.file("one/reduced.csv")).find(",NA") == std::string::npos);
  REQUIRE(pare::test::run({"apply", dir.file("one/plan.json"), data, "--out", dir.file("applied"), "--quiet"}).code == 0);
  CHECK(TempDir::read(dir.file("applied/reduced.csv")) == TempDir::read(dir.file("one/reduced.csv")));

  SECTION("a changed reference is refused") {
    {
      std::fstream f(dir.file("one/impute-reference.npy"), std::ios::in | std::ios::out | std::ios::binary);
      f.seekp(200);
      f.put('\x7f');
    }
    const auto r = pare::test::run({"apply", dir.file("one/plan.json"), data, "--out", dir.file("bad")});
    CHECK(r.code != 0);
    CHECK_THAT(r.err, Catch::Contains("impute-reference.npy") && Catch::Contains("SHA-256"));
    CHECK_FALSE(std::filesystem::exists(dir.file("bad")));
  }
  SECTION("folds: each split's held-out samples are filled from its training samples") {
    const auto r = pare::test::run({"folds", data, "--label", "class", "--impute", "knn", "--keep", "5", "--folds",
                                    "3", "--out", dir.file("folds"), "--quiet"});
    REQUIRE(r.code == 0);
    CHECK(std::filesystem::exists(dir.file("folds/r1-f2/impute-reference.npy")));
    CHECK(TempDir::read(dir.file("folds/r1-f2/held-out/reduced.csv")).find(",NA") == std::string::npos);
  }
}
