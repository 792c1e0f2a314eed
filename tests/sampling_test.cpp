// Sampling and class balancing (issue 17, item 4): --subsample draws a stratified subset of the
// asked size; --balance scores every class on as many samples as the smallest has, exactly as
// scoring those rows alone would; --balance-export writes down-sampled, repeated or SMOTE samples
// (each synthetic sample on the segment between a sample and one of its k nearest neighbours in
// its class, the definition of Chawla et al. 2002, checked here by brute force). Data: Debian's
// python3-sklearn breast cancer (569 x 30, classes of 212 and 357) and wine data (178 x 13, classes
// of 59, 71 and 48; CHECKS.md §10).
#include <algorithm>   // std::sort, std::count
#include <cmath>       // std::abs, std::sqrt
#include <cstdint>     // std::int64_t
#include <filesystem>  // std::filesystem::exists
#include <map>         // std::map
#include <numeric>     // std::iota
#include <set>         // std::set
#include <string>      // std::string
#include <vector>      // std::vector

#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include "pare/error.h"
#include "pare/io.h"
#include "pare/ranking.h"
#include "pare/sampling.h"
#include "support/cli_run.h"
#include "support/public_data.h"
#include "support/temp_dir.h"
#include "support/wine.h"

namespace {

using pare::test::TempDir;

// A public data set as a rows=samples CSV with a label column `class`, and read back.
std::string public_csv(const TempDir& dir, const std::string& name, bool& present) {
  const pare::test::PublicData d = pare::test::read_public(name, 1);
  present = d.present;
  return dir.write(name + ".csv", pare::test::labelled_csv_text(d));
}

pare::FeatureTable labelled_table(const std::string& path) {
  pare::ReadOptions read;
  read.label_column = "class";
  return pare::read_table(path, read);
}

std::map<std::string, std::int64_t> class_counts(const std::vector<std::string>& labels,
                                                 const std::vector<std::int64_t>& rows) {
  std::map<std::string, std::int64_t> out;
  for (const std::int64_t i : rows) ++out[labels[static_cast<std::size_t>(i)]];
  return out;
}

}  // namespace

TEST_CASE("sampling: --subsample draws a stratified subset of the asked size, seeded", "[sampling]") {
  TempDir dir;
  bool present = false;
  const std::string path = public_csv(dir, "breast_cancer.csv", present);
  if (!present) return;
  const pare::FeatureTable t = labelled_table(path);
  // 0.2 of 569 = 113.8 -> 114: 42.4 of 212 and 71.4 of 357 give 42 + 71, and the tie of the
  // remainders goes to the first class (c0).
  const auto rows = pare::subsample_rows(t, 0.2, 1);
  REQUIRE(rows.size() == 114);
  CHECK(std::is_sorted(rows.begin(), rows.end()));
  CHECK(class_counts(t.labels, rows) == std::map<std::string, std::int64_t>{{"c0", 43}, {"c1", 71}});
  const auto counted = pare::subsample_rows(t, 100, 1);
  CHECK(counted.size() == 100);
  CHECK(pare::subsample_rows(t, 0.2, 1) == rows);
  CHECK(pare::subsample_rows(t, 0.2, 2) != rows);
  CHECK_THROWS_AS(pare::subsample_rows(t, 2.5, 1), pare::Error);
  CHECK_THROWS_AS(pare::subsample_rows(t, 1, 1), pare::Error);
  CHECK_THROWS_AS(pare::subsample_rows(t, 569, 1), pare::Error);

  const auto r = pare::test::run({"reduce", path, "--label", "class", "--subsample", "0.2", "--keep", "5", "--out",
                                  dir.file("sub"), "--quiet"});
  REQUIRE(r.code == 0);
  const auto plan = nlohmann::json::parse(TempDir::read(dir.file("sub/plan.json")));
  CHECK(plan.at("samples").at("used") == 114);
  CHECK(plan.at("samples").at("subsample").at("ids").size() == 114);
  CHECK(plan.at("samples").at("subsample").at("ids").at(0) == t.sample_ids[static_cast<std::size_t>(rows[0])]);
}

TEST_CASE("sampling: --balance scores every class on the smallest class's count", "[sampling]") {
  TempDir dir;
  bool present = false;
  const std::string path = public_csv(dir, "breast_cancer.csv", present);
  if (!present) return;
  const pare::FeatureTable t = labelled_table(path);
  const auto rows = pare::balance_rows(t.labels, {}, 1, pare::kBalanceStream);
  CHECK(class_counts(t.labels, rows) == std::map<std::string, std::int64_t>{{"c0", 212}, {"c1", 212}});
  // Within a subset: the subset's smallest class.
  std::vector<std::int64_t> first(300);
  std::iota(first.begin(), first.end(), 0);
  const auto within = pare::balance_rows(t.labels, first, 1, 7);
  const auto in_first = class_counts(t.labels, first);
  const std::int64_t smallest = std::min(in_first.at("c0"), in_first.at("c1"));
  CHECK(class_counts(t.labels, within) == std::map<std::string, std::int64_t>{{"c0", smallest}, {"c1", smallest}});
  CHECK(std::includes(first.begin(), first.end(), within.begin(), within.end()));

  // score_features on the rows equals score_features on a table of those rows, bit for bit.
  std::vector<std::int64_t> features(30);
  std::iota(features.begin(), features.end(), 0);
  const pare::ScoreOptions options;
  const pare::FeatureScores on_rows = pare::score_features(t.values, features, pare::encode_classes(t.labels), options,
                                                           {}, rows);
  pare::Matrix sub(static_cast<Eigen::Index>(rows.size()), 30);
  std::vector<std::string> labels;
  for (std::size_t i = 0; i < rows.size(); ++i) {
    sub.row(static_cast<Eigen::Index>(i)) = t.values.row(rows[i]);
    labels.push_back(t.labels[static_cast<std::size_t>(rows[i])]);
  }
  const pare::FeatureScores alone = pare::score_features(sub, features, pare::encode_classes(labels), options);
  CHECK(on_rows.mi == alone.mi);
  CHECK(on_rows.chi2_q == alone.chi2_q);
  CHECK(on_rows.f == alone.f);
  CHECK(on_rows.variance == alone.variance);

  const auto r = pare::test::run({"reduce", path, "--label", "class", "--balance", "smallest", "--keep", "5", "--out",
                                  dir.file("bal"), "--quiet"});
  REQUIRE(r.code == 0);
  const auto plan = nlohmann::json::parse(TempDir::read(dir.file("bal/plan.json")));
  CHECK(plan.at("balance").at("scored_samples").size() == 424);
  const auto stable = pare::test::run({"reduce", path, "--label", "class", "--balance", "smallest", "--keep", "5",
                                       "--resamples", "10", "--out", dir.file("bal-st"), "--quiet"});
  CHECK(stable.code == 0);
  const auto target = pare::test::run({"reduce", path, "--target", "f1", "--balance", "smallest", "--out",
                                       dir.file("bad")});
  CHECK(target.code == 2);
  CHECK_THAT(target.err, Catch::Contains("target has none"));
}

TEST_CASE("sampling: balanced exports: down-sampled, repeated, SMOTE between neighbours", "[sampling]") {
  TempDir dir;
  bool present = false;
  const pare::FeatureTable wine = pare::test::wine_table(dir, present);
  if (!present) return;
  const pare::ClassCodes codes = pare::encode_classes(wine.labels);
  REQUIRE(codes.counts == std::vector<std::int64_t>{59, 71, 48});
  const std::vector<std::int64_t> columns{0, 6, 9, 12};  // alcohol, flavanoids, colour intensity, proline

  const pare::BalancedSamples small = pare::balanced_samples(wine, columns, pare::BalanceExport::kSmallest, 1);
  REQUIRE(small.ids.size() == 3 * 48);
  std::map<std::string, int> per;
  for (const auto& l : small.labels) ++per[l];
  CHECK(per == std::map<std::string, int>{{"c0", 48}, {"c1", 48}, {"c2", 48}});
  CHECK(std::set<std::string>(small.ids.begin(), small.ids.end()).size() == small.ids.size());

  const pare::BalancedSamples large = pare::balanced_samples(wine, columns, pare::BalanceExport::kLargest, 1);
  REQUIRE(large.ids.size() == 3 * 71);
  std::map<std::string, std::int64_t> row_of;
  for (std::int64_t i = 0; i < wine.n_samples(); ++i) row_of[wine.sample_ids[static_cast<std::size_t>(i)]] = i;
  for (std::size_t i = 0; i < large.ids.size(); ++i) {
    const auto hash = large.ids[i].find('#');
    const std::string base = large.ids[i].substr(0, hash);
    REQUIRE(row_of.count(base) == 1);
    for (std::size_t c = 0; c < columns.size(); ++c)
      CHECK(large.values(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(c)) ==
            wine.values(row_of[base], columns[c]));
    if (hash != std::string::npos) CHECK(large.origin[i] == "repeat of " + base);
  }

  const pare::BalancedSamples smote = pare::balanced_samples(wine, columns, pare::BalanceExport::kSmote, 1);
  REQUIRE(smote.ids.size() == 3 * 71);
  per.clear();
  for (const auto& l : smote.labels) ++per[l];
  CHECK(per == std::map<std::string, int>{{"c0", 71}, {"c1", 71}, {"c2", 71}});
  int synthetic = 0;
  for (std::size_t i = 0; i < smote.ids.size(); ++i) {
    if (smote.ids[i].rfind("synthetic-", 0) != 0) continue;
    ++synthetic;
    // "between A and B (gap u)": B is among A's 5 nearest neighbours in its class and the values
    // are A + u (B - A).
    const std::string& o = smote.origin[i];
    const auto and_at = o.find(" and "), gap_at = o.find(" (gap ");
    const std::string a = o.substr(8, and_at - 8), b = o.substr(and_at + 5, gap_at - and_at - 5);
    const std::int64_t ra = row_of.at(a), rb = row_of.at(b);
    CHECK(wine.labels[static_cast<std::size_t>(ra)] == smote.labels[i]);
    CHECK(wine.labels[static_cast<std::size_t>(rb)] == smote.labels[i]);
    auto distance = [&](std::int64_t x, std::int64_t y) {
      double s = 0;
      for (const std::int64_t c : columns) {
        const double d = static_cast<double>(wine.values(x, c)) - static_cast<double>(wine.values(y, c));
        s += d * d;
      }
      return s;
    };
    std::vector<double> others;
    for (std::int64_t k = 0; k < wine.n_samples(); ++k)
      if (k != ra && wine.labels[static_cast<std::size_t>(k)] == smote.labels[i]) others.push_back(distance(ra, k));
    std::sort(others.begin(), others.end());
    CHECK(distance(ra, rb) <= others.at(4));
    // u from the column where the two differ most
    std::size_t widest = 0;
    for (std::size_t c = 1; c < columns.size(); ++c)
      if (std::abs(wine.values(rb, columns[c]) - wine.values(ra, columns[c])) >
          std::abs(wine.values(rb, columns[widest]) - wine.values(ra, columns[widest])))
        widest = c;
    const double xa = wine.values(ra, columns[widest]), xb = wine.values(rb, columns[widest]);
    REQUIRE(xb != xa);
    const double u = (smote.values(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(widest)) - xa) / (xb - xa);
    CHECK(u >= -1e-4);
    CHECK(u <= 1 + 1e-4);
    for (std::size_t c = 0; c < columns.size(); ++c) {
      const double va = wine.values(ra, columns[c]), vb = wine.values(rb, columns[c]);
      CHECK(smote.values(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(c)) ==
            Approx(va + u * (vb - va)).epsilon(1e-4).margin(1e-4 * std::abs(vb - va) + 1e-6));
    }
  }
  CHECK(synthetic == (71 - 59) + (71 - 48));
  CHECK(pare::balanced_samples(wine, columns, pare::BalanceExport::kSmote, 1).origin == smote.origin);  // seeded

  SECTION("through reduce: balanced.csv beside reduced.csv, in its format") {
    const std::string path = dir.file("wine.csv");
    const auto r = pare::test::run({"reduce", path, "--label", "class", "--keep", "4", "--balance-export", "smote",
                                    "--out", dir.file("out"), "--quiet"});
    REQUIRE(r.code == 0);
    const std::string reduced = TempDir::read(dir.file("out/reduced.csv"));
    const std::string balanced = TempDir::read(dir.file("out/balanced.csv"));
    CHECK(balanced.substr(0, balanced.find('\n')) == reduced.substr(0, reduced.find('\n')));  // same header
    CHECK(std::count(balanced.begin(), balanced.end(), '\n') == 1 + 3 * 71);
    CHECK(balanced.find("synthetic-1,") != std::string::npos);
    const auto plan = nlohmann::json::parse(TempDir::read(dir.file("out/plan.json")));
    CHECK(plan.at("balance_export").at("synthetic") == 35);
    CHECK(plan.at("balance_export").at("method") == "smote");
    const auto unlabelled = pare::test::run({"reduce", path, "--balance-export", "smote", "--out", dir.file("bad")});
    CHECK(unlabelled.code == 2);
    CHECK_FALSE(std::filesystem::exists(dir.file("bad")));
  }
}
