// pare/plan.h: plan.json written from a run's result and record, loaded back, and replayed by
// apply_plan with the same column steps as the reduction, bit for bit.
#include <cstring>  // std::memcmp
#include <string>   // std::string
#include <vector>   // std::vector

#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include "pare/io.h"
#include "pare/pipeline.h"
#include "pare/plan.h"
#include "support/wine.h"

using pare::test::TempDir;
using pare::test::wine_options;
using pare::test::wine_table;

TEST_CASE("apply_plan replays the selection's values bit for bit from plan.json", "[pipeline][plan]") {
  TempDir dir;
  bool present = false;
  pare::FeatureTable table = wine_table(dir, present);
  if (!present) return;
  const pare::FeatureTable original = wine_table(dir, present);
  pare::PipelineOptions options;
  options.reduce = wine_options();
  options.reduce.log2 = true;
  options.reduce.scale = true;
  std::vector<std::vector<float>> seen;
  const pare::PipelineResult result =
      pare::run_pipeline(table, options, 0, [&](const pare::FeatureTable& t, const pare::PipelineResult& r) {
        for (const std::int64_t j : r.reduction.kept)
          seen.emplace_back(t.values.col(j).data(), t.values.col(j).data() + t.n_samples());
      });
  pare::RunRecord run;
  run.input_path = dir.file("wine.csv");
  const std::string path = dir.write("plan.json", pare::plan_json(table, result, run));
  const pare::Plan plan = pare::load_plan(path);
  REQUIRE(plan.names.size() == 10);
  REQUIRE(plan.log2);
  pare::ApplyReport report;
  const pare::FeatureTable applied = pare::apply_plan(plan, original, false, report);
  for (std::size_t k = 0; k < plan.names.size(); ++k)
    REQUIRE(std::memcmp(applied.values.col(static_cast<Eigen::Index>(k)).data(), seen[k].data(), sizeof(float) * 178) == 0);
  const nlohmann::json document = nlohmann::json::parse(pare::read_file_text(path));
  REQUIRE(document["sample_screen"]["samples_before_dropping"] == 178);
  REQUIRE(document["steps"].size() == result.reduction.steps.size());
}

TEST_CASE("plan.json records the samples left out and the screen, and reads back its numbers exactly", "[plan]") {
  TempDir dir;
  bool present = false;
  pare::FeatureTable table = wine_table(dir, present);
  if (!present) return;
  pare::PipelineOptions options;
  options.reduce = wine_options();
  const pare::PipelineResult result = pare::run_pipeline(table, options);
  pare::RunRecord run;
  run.input_path = dir.file("wine.csv");
  run.samples_read = 180;
  run.left_out.unlabelled = {"u1", "u2"};
  const std::string path = dir.write("plan.json", pare::plan_json(table, result, run));
  const nlohmann::json document = nlohmann::json::parse(pare::read_file_text(path));
  REQUIRE(document["samples"]["in_file"] == 180);
  REQUIRE(document["samples"]["used"] == 178);
  REQUIRE(document["samples"]["left_out_unlabelled"] == std::vector<std::string>{"u1", "u2"});
  REQUIRE(document["sample_screen"]["screened"] == true);
  REQUIRE(document["outputs"].contains("ranking"));
  REQUIRE_FALSE(document["outputs"].contains("scores"));  // no projection, no scores.csv
  const pare::Plan plan = pare::load_plan(path);
  const pare::Reduction& r = result.reduction;
  REQUIRE(plan.names.size() == r.kept.size());
  for (std::size_t k = 0; k < r.kept.size(); ++k) {
    REQUIRE(plan.names[k] == table.feature_names[static_cast<std::size_t>(r.kept[k])]);
    REQUIRE(plan.fill[k] == r.fill[static_cast<std::size_t>(r.kept[k])]);
    REQUIRE(plan.center[k] == r.center[k]);  // JSON keeps doubles exactly (shortest round trip)
    REQUIRE(plan.spread[k] == r.scale[k]);
  }
}
