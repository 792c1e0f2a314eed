// pare/pipeline.h and the step functions of pare/reduce.h: the steps run one by one equal
// reduce(); run_pipeline equals the steps plus a PCA of the kept columns; the SelectionDone hook
// sees the reduced values before the projection uses the matrix; reduce_to_folder writes exactly
// the files plan.json lists (plan_test.cpp: the plan replays them).
#include <algorithm>   // std::sort
#include <cmath>       // std::abs
#include <cstring>     // std::memcmp
#include <filesystem>  // std::filesystem::directory_iterator
#include <set>         // std::set
#include <string>      // std::string
#include <vector>      // std::vector

#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include "pare/io.h"
#include "pare/pipeline.h"
#include "pare/plan.h"
#include "pare/reduce.h"
#include "pare/run_files.h"
#include "support/public_data.h"
#include "support/wine.h"
#include "support/temp_dir.h"

using pare::test::TempDir;
using pare::test::wine_options;
using pare::test::wine_table;

TEST_CASE("the steps run one by one equal reduce()", "[pipeline]") {
  TempDir dir;
  bool present = false;
  pare::FeatureTable a = wine_table(dir, present);
  if (!present) return;
  pare::FeatureTable b = wine_table(dir, present);
  const pare::ReduceOptions o = wine_options();
  const pare::Reduction whole = pare::reduce(a, o);
  pare::Reduction r = pare::start_reduction(b, o);
  pare::filter_missing(b, o, r);
  pare::learn_fill(b, o, r);
  pare::transform_step(b, o, r);
  pare::filter_variance(b, o, r);
  pare::rank_relevance(b, o, r);
  pare::prune_redundant(b, o, r);
  pare::take_top(b, o, r);
  REQUIRE(r.kept == whole.kept);
  REQUIRE(r.kept.size() == 10);
  REQUIRE(r.steps.size() == whole.steps.size());
  for (std::size_t s = 0; s < r.steps.size(); ++s) {
    REQUIRE(r.steps[s].step == whole.steps[s].step);
    REQUIRE(r.steps[s].out == whole.steps[s].out);
  }
  std::size_t redundant = 0;
  for (std::size_t j = 0; j < r.decisions.size(); ++j) {
    REQUIRE(r.decisions[j].step == whole.decisions[j].step);
    REQUIRE(r.decisions[j].reason == whole.decisions[j].reason);
    redundant += r.decisions[j].step == pare::Step::kRedundancy;
  }
  REQUIRE(redundant == 1);  // the pair above 0.8 (numpy's corrcoef of the wine data: 0.865)
  for (const std::int64_t j : r.kept)
    REQUIRE(std::memcmp(a.values.col(j).data(), b.values.col(j).data(), sizeof(float) * 178) == 0);
  REQUIRE(std::string(pare::step_name(pare::Step::kRedundancy)) == "redundancy");
}

TEST_CASE("run_pipeline: the selection, then the PCA of the kept columns", "[pipeline]") {
  TempDir dir;
  bool present = false;
  pare::FeatureTable table = wine_table(dir, present);
  if (!present) return;
  pare::FeatureTable plain = wine_table(dir, present);
  pare::PipelineOptions options;
  options.reduce = wine_options();
  options.reduce.keep = 0;
  options.reduce.prune = false;  // all 13 features, for the published ratios below
  options.reduce.scale = true;
  options.projection.components = 3;
  std::vector<std::vector<float>> seen;
  int calls = 0;
  const pare::PipelineResult result =
      pare::run_pipeline(table, options, 0.5, [&](const pare::FeatureTable& t, const pare::PipelineResult& r) {
        ++calls;
        REQUIRE_FALSE(r.projection.has_value());
        for (const std::int64_t j : r.reduction.kept)
          seen.emplace_back(t.values.col(j).data(), t.values.col(j).data() + t.n_samples());
      });
  REQUIRE(calls == 1);
  const pare::Reduction alone = pare::reduce(plain, options.reduce);
  REQUIRE(result.reduction.kept == alone.kept);
  REQUIRE(result.reduction.steps.front().step == pare::Step::kRead);
  REQUIRE(result.reduction.steps.front().seconds == 0.5);
  REQUIRE(result.reduction.steps.back().step == pare::Step::kProject);
  REQUIRE(result.samples.ids.size() == 178);
  REQUIRE(result.screen.done);
  REQUIRE(result.projection.has_value());
  // Correlation PCA of the 13 wine features: explained variance 36.2%, 19.2%, 11.1% (scikit-learn's
  // and most textbooks' figures for standardised wine; recalled from memory, to 3 digits).
  const Eigen::VectorXd& ratio = result.projection->ratio;
  REQUIRE(std::abs(ratio(0) - 0.362) < 0.0006);
  REQUIRE(std::abs(ratio(1) - 0.192) < 0.0006);
  REQUIRE(std::abs(ratio(2) - 0.111) < 0.0006);
  // The hook saw the kept columns as reduce() leaves them (filled, standardised).
  for (std::size_t k = 0; k < alone.kept.size(); ++k)
    REQUIRE(std::memcmp(seen[k].data(), plain.values.col(alone.kept[k]).data(), sizeof(float) * 178) == 0);
}

TEST_CASE("reduce_to_folder writes exactly the files plan.json lists", "[pipeline][plan]") {
  TempDir dir;
  bool present = false;
  for (const bool select : {true, false}) {
    pare::FeatureTable table = wine_table(dir, present);
    if (!present) return;
    pare::PipelineOptions options;
    options.reduce = wine_options();
    options.select = select;
    options.projection.components = 2;
    pare::RunRecord run;
    run.input_path = dir.file("wine.csv");
    const std::string out = dir.file(select ? "reduce" : "project");
    const pare::PipelineResult result = pare::reduce_to_folder(table, options, run, out);
    std::set<std::string> written, listed{"plan.json"};
    for (const auto& entry : std::filesystem::directory_iterator(out)) written.insert(entry.path().filename().string());
    const nlohmann::json plan = nlohmann::json::parse(pare::read_file_text(out + "/plan.json"));
    for (const auto& [role, file] : plan["outputs"].items()) listed.insert(file.get<std::string>());
    REQUIRE(written == listed);
    REQUIRE(written.count("ranking.tsv") == (select ? 1u : 0u));
    REQUIRE(result.reduction.kept.size() == (select ? 10u : 13u));
    const std::string summary = pare::reduce_summary(table, result, run, out);
    REQUIRE(summary.rfind(select ? "pare reduce: " : "pare project: ", 0) == 0);
  }
}

TEST_CASE("between_group_share is eta squared", "[pipeline]") {
  // Worked by hand: scores 1, 3, 5, 7 in groups a, a, b, b. Mean 4; total sum of squares
  // 9 + 1 + 1 + 9 = 20; group means 2 and 6, between-group sum 2 x 4 + 2 x 4 = 16; 16 / 20 = 0.8.
  Eigen::MatrixXd scores(4, 2);
  scores << 1, 2, 3, 2, 5, 2, 7, 2;
  const std::vector<double> share = pare::between_group_share(scores, {"a", "a", "b", "b"});
  REQUIRE(share.size() == 2);
  REQUIRE(share[0] == Approx(0.8).epsilon(1e-12));
  REQUIRE(share[1] == 0.0);  // a constant column has no variance to share
  REQUIRE(pare::between_group_share(scores, {"a", "b"}).empty());
}
