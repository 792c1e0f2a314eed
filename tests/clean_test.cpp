// Cleaning before the selection (issue 17, item 6): quantile normalisation on CHECKS.md §11's
// worked example, its reading of samples with gaps, the count floor, the sample missing filter, and
// apply replaying the normalisation. numpy references on public data are in
// tests/reference/clean_reference.py.
#include <cmath>    // std::isnan
#include <limits>   // std::numeric_limits
#include <sstream>  // std::istringstream
#include <string>   // std::string
#include <vector>   // std::vector

#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include "pare/clean.h"
#include "pare/io.h"
#include "support/cli_run.h"
#include "support/temp_dir.h"

namespace {

using pare::test::TempDir;
constexpr float kGap = std::numeric_limits<float>::quiet_NaN();

}  // namespace

TEST_CASE("clean: quantile normalisation of the worked example", "[clean]") {
  // CHECKS.md §11 (rows = features, columns = samples) [[5,4,3],[2,1,4],[3,4,6],[4,2,8]]: the
  // reference is (2, 3, 4.6667, 5.6667) and the result [[5.6667, 5.1667, 2], [2, 2, 3],
  // [3, 5.1667, 4.6667], [4.6667, 3, 5.6667]]. Here samples are rows.
  pare::Matrix x(3, 4);
  x << 5, 2, 3, 4,  //
      4, 1, 4, 2,   //
      3, 4, 6, 8;
  const std::vector<std::int64_t> all{0, 1, 2, 3};
  const std::vector<double> reference = pare::quantile_reference(x, all);
  REQUIRE(reference.size() == 4);
  CHECK(reference[0] == Approx(2).epsilon(1e-12));
  CHECK(reference[1] == Approx(3).epsilon(1e-12));
  CHECK(reference[2] == Approx(14.0 / 3).epsilon(1e-12));
  CHECK(reference[3] == Approx(17.0 / 3).epsilon(1e-12));
  pare::quantile_map(x, all, reference, 2);
  pare::Matrix want(3, 4);
  want << 17.0 / 3, 2, 3, 14.0 / 3,  //
      31.0 / 6, 2, 31.0 / 6, 3,      //
      2, 3, 14.0 / 3, 17.0 / 3;
  for (Eigen::Index i = 0; i < 3; ++i)
    for (Eigen::Index j = 0; j < 4; ++j) CHECK(x(i, j) == Approx(want(i, j)).epsilon(1e-6));

  SECTION("a sample with a gap is read at evenly spaced positions") {
    // Sample 2 without its third value: 3 observed (1, 2, 4) at reference positions 0, 1.5 and 3.
    pare::Matrix y(3, 4);
    y << 5, 2, 3, 4,  //
        4, 1, kGap, 2,  //
        3, 4, 6, 8;
    const std::vector<double> ref = pare::quantile_reference(y, all);
    // sorted rows (2,3,4,5), (1,2,4) read at 0, 2/3, 4/3, 2 -> (1, 1.6667, 2.6667, 4), (3,4,6,8)
    CHECK(ref[1] == Approx((3 + 5.0 / 3 + 4) / 3).epsilon(1e-12));
    pare::quantile_map(y, all, ref, 1);
    CHECK(std::isnan(y(1, 2)));
    CHECK(y(1, 1) == Approx(ref[0]).epsilon(1e-6));                        // rank 1 at position 0
    CHECK(y(1, 3) == Approx((ref[1] + ref[2]) / 2).epsilon(1e-6));         // rank 2 at position 1.5
    CHECK(y(1, 0) == Approx(ref[3]).epsilon(1e-6));                        // rank 3 at position 3
  }
}

TEST_CASE("clean: floor, sparse samples and normalisation through reduce and apply", "[clean]") {
  TempDir dir;
  // rows=features counts: 6 samples; g3 reaches 10 in only one sample, s6 misses 3 of 5 values.
  const std::string data = dir.write("counts.csv",
                                     "gene,s1,s2,s3,s4,s5,s6\n"
                                     "g1,10,20,30,40,50,NA\n"
                                     "g2,100,80,90,70,60,NA\n"
                                     "g3,0,1,12,0,2,3\n"
                                     "g4,15,25,35,45,11,NA\n"
                                     "g5,30,10,20,40,50,60\n");
  for (const std::string how : {"sum", "quantile"}) {
    INFO(how);
    const std::string out = dir.file("out-" + how);
    const auto r = pare::test::run({"reduce", data, "--layout", "rows=features", "--drop-samples-missing-above",
                                    "0.5", "--count-floor", "10", "--floor-samples", "2", "--normalize", how,
                                    "--no-prune", "--out", out, "--quiet"});
    REQUIRE(r.code == 0);
    const auto plan = nlohmann::json::parse(TempDir::read(out + "/plan.json"));
    const auto& clean = plan.at("clean");
    REQUIRE(clean.at("samples_left_out").size() == 1);
    CHECK(clean.at("samples_left_out")[0].at("sample") == "s6");
    CHECK(clean.at("samples_left_out")[0].at("missing_rate").get<double>() == Approx(0.6));
    CHECK(clean.at("normalized_features") == nlohmann::json::array({"g1", "g2", "g4", "g5"}));
    const std::string log = TempDir::read(out + "/selection-log.tsv");
    CHECK(log.find("g3\t3\tdropped\tfloor\tfewer than 2 samples at 10 or more") != std::string::npos);
    if (how == "sum") {
      // s1 over g1, g2, g4, g5: 10 + 100 + 15 + 30 = 155, so g1 = 10 / 155 x 10^6 = 64516.129
      CHECK(TempDir::read(out + "/reduced.csv").find("g1,64516.13") != std::string::npos);
    }
    // apply on the same file (s6 included: it is normalised too, as a new sample) replays the
    // training samples' values exactly.
    const auto a = pare::test::run({"apply", out + "/plan.json", data, "--out", dir.file("applied-" + how), "--quiet"});
    REQUIRE(a.code == 0);
    const std::string trained = TempDir::read(out + "/reduced.csv");
    const std::string applied = TempDir::read(dir.file("applied-" + how) + "/reduced.csv");
    for (const std::string gene : {"g1,", "g2,", "g4,", "g5,"}) {
      const auto line = [&](const std::string& text) {
        const std::size_t at = text.find("\n" + gene) + 1;
        return text.substr(at, text.find('\n', at) - at);
      };
      const std::string t = line(trained), p = line(applied);
      CHECK(p.substr(0, t.size()) == t);  // the applied line has s6 appended
    }
  }
  // project --normalize: the PCA of the normalised samples, and apply projects new samples the same.
  const auto projected = pare::test::run({"project", data, "--layout", "rows=features", "--normalize", "quantile",
                                          "--components", "2", "--out", dir.file("pca"), "--quiet"});
  REQUIRE(projected.code == 0);
  CHECK(nlohmann::json::parse(TempDir::read(dir.file("pca/plan.json"))).at("clean").at("normalize") == "quantile");
  REQUIRE(pare::test::run({"apply", dir.file("pca/plan.json"), data, "--out", dir.file("pca-applied"), "--quiet"}).code == 0);
  {
    // The same samples get the same scores (to rounding: apply projects in another order).
    std::istringstream trained(TempDir::read(dir.file("pca/scores.csv")));
    std::istringstream applied(TempDir::read(dir.file("pca-applied/scores.csv")));
    std::string a, b;
    std::getline(trained, a);
    std::getline(applied, b);
    CHECK(a == b);
    while (std::getline(trained, a) && std::getline(applied, b)) {
      const auto x = pare::split_fields(a, ','), y = pare::split_fields(b, ',');
      REQUIRE(x.size() == y.size());
      CHECK(x[0] == y[0]);
      for (std::size_t c = 1; c < x.size(); ++c) CHECK(std::stod(y[c]) == Approx(std::stod(x[c])).epsilon(1e-6).margin(1e-6));
    }
  }
  const auto bad = pare::test::run({"reduce", data, "--layout", "rows=features", "--floor-samples", "2", "--out",
                                    dir.file("bad")});
  CHECK(bad.code == 2);
  CHECK_THAT(bad.err, Catch::Contains("count-floor"));
}
