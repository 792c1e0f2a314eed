// pare/load.h with a continuous target: the sheet's column becomes FeatureTable::target, samples
// without a value are left out of a supervised run (and kept, as NaN, in another), a value that is
// not a number is an error at the sheet's line, and the pipeline scores against the target. The
// data are the wine measurements of Debian's python3-sklearn (support/wine.h); the target is one
// of them (proline), the rest the features.
#include <algorithm>  // std::is_sorted
#include <cmath>      // std::abs, std::isnan
#include <string>     // std::string
#include <vector>     // std::vector

#include <catch2/catch.hpp>

#include "pare/error.h"
#include "pare/load.h"
#include "pare/pipeline.h"
#include "pare/reduce.h"
#include "support/public_data.h"
#include "support/temp_dir.h"

using pare::test::TempDir;

namespace {

// wine as rows=samples without its class (features f1..f12), and a sheet whose `proline` column
// (the 13th measurement) is the target; samples s3 and s50 have NA, `bad` replaces s7's value.
struct WineTarget {
  bool present = false;
  std::string data, sheet;
};

WineTarget write_wine_target(const TempDir& dir, const std::string& bad = {}) {
  const pare::test::PublicData d = pare::test::read_public("wine_data.csv", 1);
  WineTarget w;
  w.present = d.present;
  if (!w.present) return w;
  std::string csv = "sample", sheet = "sample,batch,proline\n";
  for (std::size_t j = 0; j + 1 < d.p(); ++j) csv += ",f" + std::to_string(j + 1);
  csv += "\n";
  for (std::size_t i = 0; i < d.n(); ++i) {
    const std::string id = "s" + std::to_string(i + 1);
    csv += id;
    for (std::size_t j = 0; j + 1 < d.p(); ++j) csv += "," + d.values[i][j];
    csv += "\n";
    const std::string value = id == "s3" || id == "s50" ? "NA" : id == "s7" && !bad.empty() ? bad : d.values[i].back();
    sheet += id + ",b1," + value + "\n";
  }
  w.data = dir.write("wine.csv", csv);
  w.sheet = dir.write("sheet.csv", sheet);
  return w;
}

pare::DataRequest target_request(const WineTarget& w, bool supervised) {
  pare::DataRequest request;
  request.path = w.data;
  request.labels = w.sheet + ":proline";
  request.target = true;
  request.supervised = supervised;
  request.hash = false;
  return request;
}

}  // namespace

TEST_CASE("load_data: a sheet column as a continuous target", "[load][target]") {
  TempDir dir;
  const WineTarget w = write_wine_target(dir);
  if (!w.present) return;
  const pare::LoadedData loaded = pare::load_data(target_request(w, true));
  const pare::FeatureTable& t = loaded.table;
  REQUIRE(t.has_target());
  REQUIRE_FALSE(t.has_labels());
  REQUIRE(t.label_name == "proline");
  REQUIRE(t.n_samples() == 176);  // 178 less the two NA
  REQUIRE(t.target.size() == 176);
  REQUIRE(loaded.left_out.target);
  REQUIRE(loaded.left_out.unlabelled == std::vector<std::string>{"s3", "s50"});
  REQUIRE(loaded.warnings.size() == 1);
  REQUIRE(loaded.warnings[0].find("2 samples without a target value left out") != std::string::npos);
  // s1's proline in wine_data.csv is 1065 (the first line of the file)
  REQUIRE(t.sample_ids[0] == "s1");
  REQUIRE(t.target[0] == 1065.0);

  // Not supervised (a projection): every sample kept, NaN where the sheet has none.
  const pare::LoadedData all = pare::load_data(target_request(w, false));
  REQUIRE(all.table.n_samples() == 178);
  REQUIRE(std::isnan(all.table.target[2]));
  REQUIRE(all.left_out.unlabelled.empty());
}

TEST_CASE("load_data: a target value that is not a number is an error at the sheet's line", "[load][target]") {
  TempDir dir;
  const WineTarget w = write_wine_target(dir, "high");
  if (!w.present) return;
  try {
    (void)pare::load_data(target_request(w, true));
    FAIL("no error");
  } catch (const pare::Error& e) {
    REQUIRE(e.kind() == pare::ErrorKind::kInput);
    const std::string what = e.what();
    REQUIRE(what.find(w.sheet + ":8:") == 0);  // header, then s1..s7: s7 is line 8
    REQUIRE(what.find("\"high\", not a finite number") != std::string::npos);
  }
}

TEST_CASE("run_pipeline against a target: Spearman ranking, the target's columns in the log", "[load][target][pipeline]") {
  TempDir dir;
  const WineTarget w = write_wine_target(dir);
  if (!w.present) return;
  pare::LoadedData loaded = pare::load_data(target_request(w, true));
  pare::PipelineOptions o;
  o.reduce.rank_by = pare::Criterion::kSpearman;
  o.reduce.prune = false;
  const pare::PipelineResult result = pare::run_pipeline(loaded.table, o);
  const pare::Reduction& r = result.reduction;
  REQUIRE(r.supervised);
  REQUIRE(r.scores.continuous);
  REQUIRE(r.scores.chi2.empty());
  REQUIRE(r.kept.size() == 12);
  std::vector<double> rho;
  for (const std::int64_t j : r.kept)
    rho.push_back(std::abs(r.scores.spearman_rho[static_cast<std::size_t>(r.score_of[static_cast<std::size_t>(j)])]));
  REQUIRE(std::is_sorted(rho.rbegin(), rho.rend()));
  const std::string log = pare::selection_log_tsv(loaded.table, r);
  REQUIRE(log.find("\tpearson_r\tpearson_p\tpearson_q\tspearman_rho\tspearman_p\tspearman_q\tmi\t") !=
          std::string::npos);
  REQUIRE(log.find("\tchi2") == std::string::npos);

  // A criterion of classes against a target is a usage error, not a ranking.
  pare::LoadedData again = pare::load_data(target_request(w, true));
  o.reduce.rank_by = pare::Criterion::kF;
  try {
    (void)pare::run_pipeline(again.table, o);
    FAIL("no error");
  } catch (const pare::Error& e) {
    REQUIRE(e.kind() == pare::ErrorKind::kUsage);
    REQUIRE(std::string(e.what()).find("scores classes, not a continuous target") != std::string::npos);
  }
}
