// pare folds: the fold assignment (every sample held out once per repeat, classes spread evenly,
// a target dealt in blocks, groups kept whole), and the must-have of issue 17: a split's selection
// is byte for byte what `pare reduce --samples <its training ids>` gives, no held-out sample is
// used by its split, the held-out samples get the apply outputs. Data: Debian's python3-sklearn
// wine data (178 x 13, classes of 59, 71 and 48: none divisible by the folds used) and diabetes
// data (442 x 10 with a continuous target, many ties), CHECKS.md §10.
#include <algorithm>   // std::sort, std::count
#include <cmath>       // std::abs
#include <cstdint>     // std::int64_t
#include <filesystem>  // std::filesystem::exists
#include <map>         // std::map
#include <numeric>     // std::iota
#include <set>         // std::set
#include <sstream>     // std::istringstream
#include <string>      // std::string
#include <vector>      // std::vector

#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include "pare/error.h"
#include "pare/folds.h"
#include "pare/io.h"
#include "support/cli_run.h"
#include "support/public_data.h"
#include "support/temp_dir.h"
#include "support/wine.h"

namespace {

using pare::test::TempDir;

std::vector<std::string> lines_of(const std::string& text) {
  std::vector<std::string> out;
  std::istringstream in(text);
  std::string line;
  while (std::getline(in, line)) out.push_back(line);
  return out;
}

std::vector<std::string> fields(const std::string& line, char d = '\t') { return pare::split_fields(line, d); }

// folds.tsv as [repeat][sample id] -> fold, and the samples in file order of repeat 1.
struct FoldsFile {
  std::map<int, std::map<std::string, int>> fold;
  std::vector<std::string> order;
};

FoldsFile read_folds(const std::string& path) {
  FoldsFile f;
  const auto lines = lines_of(TempDir::read(path));
  REQUIRE(lines.at(0) == "sample\trepeat\tfold");
  for (std::size_t k = 1; k < lines.size(); ++k) {
    const auto v = fields(lines[k]);
    REQUIRE(v.size() == 3);
    const int r = std::stoi(v[1]);
    INFO(lines[k]);
    REQUIRE(f.fold[r].count(v[0]) == 0);  // once per repeat
    f.fold[r][v[0]] = std::stoi(v[2]);
    if (r == 1) f.order.push_back(v[0]);
  }
  return f;
}

// The first column of a delimited file, header skipped.
std::vector<std::string> first_column(const std::string& path, char d) {
  std::vector<std::string> ids;
  const auto lines = lines_of(TempDir::read(path));
  for (std::size_t k = 1; k < lines.size(); ++k) ids.push_back(fields(lines[k], d).at(0));
  return ids;
}

// The diabetes data (CHECKS.md §10) as a rows=samples CSV: patient id, the ten columns as the
// file writes them, and the target `progression`.
std::string diabetes_csv(const TempDir& dir, bool& present) {
  const std::string data = "/usr/lib/python3/dist-packages/sklearn/datasets/data/";
  std::string x, y;
  try {
    x = pare::read_file_text(data + "diabetes_data_raw.csv.gz");
    y = pare::read_file_text(data + "diabetes_target.csv.gz");
  } catch (const std::exception&) {
    INFO("the diabetes files of python3-sklearn are missing; CI=true makes that a failure");
    REQUIRE_FALSE(pare::test::in_ci());
    WARN("skipped: diabetes_data_raw.csv.gz not found (install python3-sklearn)");
    present = false;
    return {};
  }
  std::istringstream xs(x), ys(y);
  std::string csv = "patient,age,sex,bmi,bp,s1,s2,s3,s4,s5,s6,progression\n", line, target;
  int i = 0;
  while (std::getline(xs, line) && ys >> target) {
    if (line.empty()) continue;
    std::istringstream cells(line);
    std::string cell;
    csv += "p" + std::to_string(++i);
    while (cells >> cell) csv += "," + cell;
    csv += "," + target + "\n";
  }
  REQUIRE(i == 442);
  present = true;
  return dir.write("diabetes.csv", csv);
}

}  // namespace

TEST_CASE("folds: every sample held out once per repeat, classes within 1 of their share", "[folds]") {
  TempDir dir;
  bool present = false;
  const pare::FeatureTable wine = pare::test::wine_table(dir, present);
  if (!present) return;
  pare::FoldOptions options;
  options.folds = 5;
  options.repeats = 3;
  const pare::FoldAssignment a = pare::assign_folds(wine, options, 1);
  REQUIRE(a.fold.size() == 3);
  const pare::ClassCodes codes = pare::encode_classes(wine.labels);
  REQUIRE(codes.counts == std::vector<std::int64_t>{59, 71, 48});  // wine's classes (sklearn's DESCR)
  for (const auto& fold : a.fold) {
    REQUIRE(fold.size() == 178);
    std::vector<std::int64_t> size(5, 0);
    std::vector<std::vector<std::int64_t>> per_class(5, std::vector<std::int64_t>(3, 0));
    for (std::size_t i = 0; i < fold.size(); ++i) {
      REQUIRE(fold[i] >= 0);
      REQUIRE(fold[i] < 5);
      ++size[static_cast<std::size_t>(fold[i])];
      ++per_class[static_cast<std::size_t>(fold[i])][static_cast<std::size_t>(codes.codes[i])];
    }
    for (int f = 0; f < 5; ++f) {
      // 178 / 5 = 35.6: folds of 35 or 36
      CHECK(size[f] >= 35);
      CHECK(size[f] <= 36);
      for (int c = 0; c < 3; ++c) {
        INFO("fold " << f << ", class " << codes.classes[c] << ": " << per_class[f][c] << " of " << codes.counts[c]);
        CHECK(std::abs(static_cast<double>(per_class[f][c]) - static_cast<double>(codes.counts[c]) / 5) < 1);
      }
    }
  }
  CHECK(a.fold[0] != a.fold[1]);  // each repeat deals afresh
  CHECK(a.fold[1] != a.fold[2]);
  CHECK(pare::assign_folds(wine, options, 1).fold == a.fold);  // seeded
  CHECK(pare::assign_folds(wine, options, 2).fold != a.fold);
}

TEST_CASE("folds: a target is dealt in sorted blocks of K, groups stay whole", "[folds]") {
  TempDir dir;
  bool present = false;
  const std::string csv = diabetes_csv(dir, present);
  if (!present) return;
  pare::DataRequest request;
  request.path = csv;
  request.read.label_column = "progression";
  request.read.label_is_target = true;
  request.target = true;
  request.supervised = true;
  const pare::LoadedData loaded = pare::load_data(request);
  const pare::FeatureTable& t = loaded.table;
  REQUIRE(t.target.size() == 442);
  pare::FoldOptions options;
  options.folds = 4;
  const pare::FoldAssignment a = pare::assign_folds(t, options, 7);
  REQUIRE(a.scheme == "dealt by target");
  std::vector<std::size_t> order(442);
  std::iota(order.begin(), order.end(), 0);
  std::stable_sort(order.begin(), order.end(), [&](auto x, auto y) { return t.target[x] < t.target[y]; });
  // Each consecutive block of 4 in target order has one sample in each fold (the last block of 2
  // in two different folds), so fold sizes are 110 or 111 and each fold spans the range.
  for (std::size_t b = 0; b < order.size(); b += 4) {
    std::set<int> folds;
    for (std::size_t k = b; k < std::min(b + 4, order.size()); ++k) folds.insert(a.fold[0][order[k]]);
    INFO("block at " << b);
    CHECK(folds.size() == std::min<std::size_t>(4, order.size() - b));
  }

  // Groups: the diabetes patients in invented groups of 1 to 7 (the sex column and the age
  // decade would be real groups, but too few for a useful check): each group in one fold.
  std::vector<std::string> groups(442);
  for (std::size_t i = 0; i < groups.size(); ++i) groups[i] = "g" + std::to_string((i * 7919) % 97);
  options.folds = 5;
  options.repeats = 2;
  const pare::FoldAssignment g = pare::assign_folds(t, options, 7, groups);
  std::vector<std::int64_t> size(5, 0);
  for (const auto& fold : g.fold) {
    std::map<std::string, std::set<int>> folds_of;
    for (std::size_t i = 0; i < groups.size(); ++i) folds_of[groups[i]].insert(fold[i]);
    for (const auto& [group, folds] : folds_of) {
      INFO("group " << group);
      CHECK(folds.size() == 1);
    }
  }
  for (const int f : g.fold[0]) ++size[static_cast<std::size_t>(f)];
  // 97 groups of 4 or 5 samples dealt largest first to the smallest fold: sizes within one group.
  CHECK(*std::max_element(size.begin(), size.end()) - *std::min_element(size.begin(), size.end()) <= 5);
  CHECK(g.fold[0] != g.fold[1]);

  options.folds = 98;
  CHECK_THROWS_WITH(pare::assign_folds(t, options, 7, groups),
                    Catch::Contains("`folds` 98 is more than the 97 groups"));
  groups[3].clear();
  options.folds = 5;
  CHECK_THROWS_WITH(pare::assign_folds(t, options, 7, groups), Catch::Contains("no value in the `groups` column"));
}

TEST_CASE("folds: each split is reduce --samples on its training ids, byte for byte", "[folds]") {
  TempDir dir;
  bool present = false;
  (void)pare::test::wine_table(dir, present);  // writes wine.csv (f1..f13, class)
  if (!present) return;
  const std::string data = dir.file("wine.csv");
  const std::vector<std::string> reduce_options{"--label", "class", "--keep", "6", "--max-corr", "0.8",
                                                "--components", "2", "--seed", "3"};
  std::vector<std::string> args{"folds", data, "--folds", "4", "--repeats", "2", "--out", dir.file("f"), "--quiet"};
  args.insert(args.end(), reduce_options.begin(), reduce_options.end());
  const auto run = pare::test::run(args);
  INFO(run.err);
  REQUIRE(run.code == 0);
  const FoldsFile folds = read_folds(dir.file("f/folds.tsv"));
  REQUIRE(folds.fold.size() == 2);
  REQUIRE(folds.order.size() == 178);
  CHECK(folds.order.front() == "s1");  // input order
  CHECK(folds.order.back() == "s178");

  std::map<std::string, std::pair<std::int64_t, std::int64_t>> kept;  // feature -> (splits, rank sum)
  for (int r = 1; r <= 2; ++r)
    for (int f = 1; f <= 4; ++f) {
      const std::string split = dir.file("f/r" + std::to_string(r) + "-f" + std::to_string(f));
      INFO(split);
      std::string training, held;
      std::set<std::string> held_ids, training_ids;
      for (const auto& id : folds.order) {
        const bool out = folds.fold.at(r).at(id) == f;
        (out ? held : training) += id + "\n";
        (out ? held_ids : training_ids).insert(id);
      }
      // The must-have: the same selection as reduce on the training ids alone.
      const std::string list = dir.write("train-" + std::to_string(r) + std::to_string(f) + ".txt", training);
      std::vector<std::string> reduce{"reduce", data, "--samples", list, "--out", split + "-reduce", "--quiet"};
      reduce.insert(reduce.end(), reduce_options.begin(), reduce_options.end());
      const auto again = pare::test::run(reduce);
      INFO(again.err);
      REQUIRE(again.code == 0);
      for (const char* file : {"ranking.tsv", "selection-log.tsv", "reduced.csv", "samples.tsv", "scores.csv",
                               "loadings.tsv"}) {
        INFO(file);
        CHECK(TempDir::read(split + "/" + file) == TempDir::read(split + "-reduce/" + file));
      }
      // No held-out id is used by the split: not in its plan, its samples.tsv or its reduced matrix.
      const std::string plan_text = TempDir::read(split + "/plan.json");
      const auto plan = nlohmann::json::parse(plan_text);
      CHECK(plan["samples"]["used"] == training_ids.size());
      CHECK(plan["samples"]["fold"]["repeat"] == r);
      CHECK(plan["samples"]["fold"]["fold"] == f);
      CHECK(plan["samples"]["fold"]["held_out"] == held_ids.size());
      CHECK(plan["samples"]["list"]["sha256"] ==
            nlohmann::json::parse(TempDir::read(split + "-reduce/plan.json"))["samples"]["list"]["sha256"]);
      CHECK(TempDir::read(split + "/training-samples.txt") == training);
      for (const auto& id : held_ids) {
        INFO(id);
        CHECK(plan_text.find("\"" + id + "\"") == std::string::npos);
      }
      const auto used = first_column(split + "/samples.tsv", '\t');
      CHECK(std::set<std::string>(used.begin(), used.end()) == training_ids);
      // held-out/: the apply outputs for exactly the held-out samples.
      const auto applied = first_column(split + "/held-out/reduced.csv", ',');
      CHECK(std::set<std::string>(applied.begin(), applied.end()) == held_ids);
      CHECK(applied.size() == held_ids.size());
      const auto scored = first_column(split + "/held-out/scores.csv", ',');
      CHECK(std::set<std::string>(scored.begin(), scored.end()) == held_ids);
      CHECK(std::filesystem::exists(split + "/held-out/apply-log.tsv"));
      // kept-across-folds.tsv is recomputed below from the ranking files.
      const auto ranking = lines_of(TempDir::read(split + "/ranking.tsv"));
      REQUIRE(fields(ranking.at(0)).at(0) == "rank");
      for (std::size_t k = 1; k < ranking.size(); ++k) {
        const auto v = fields(ranking[k]);
        ++kept[v.at(1)].first;
        kept[v.at(1)].second += std::stoll(v.at(0));
      }
    }
  const auto across = lines_of(TempDir::read(dir.file("f/kept-across-folds.tsv")));
  REQUIRE(across.at(0) == "feature\tkept_in\tsplits\tfraction\tmean_rank");
  REQUIRE(across.size() == kept.size() + 1);
  for (std::size_t k = 1; k < across.size(); ++k) {
    const auto v = fields(across[k]);
    INFO(across[k]);
    const auto [splits, rank_sum] = kept.at(v.at(0));
    CHECK(std::stoll(v.at(1)) == splits);
    CHECK(v.at(2) == "8");
    CHECK(std::stod(v.at(3)) == static_cast<double>(splits) / 8);
    CHECK(std::stod(v.at(4)) == static_cast<double>(rank_sum) / static_cast<double>(splits));
    if (k > 1) {  // kept_in descending, then mean_rank ascending
      const auto u = fields(across[k - 1]);
      CHECK((std::stoll(u[1]) > std::stoll(v[1]) || (u[1] == v[1] && std::stod(u[4]) <= std::stod(v[4]))));
    }
  }
}

TEST_CASE("folds: a target, --groups from --sample-info, and any --threads", "[folds]") {
  TempDir dir;
  bool present = false;
  const std::string csv = diabetes_csv(dir, present);
  if (!present) return;
  // The sex column (1 or 2) copied as a text column `sex_group`... too few groups for 3 folds;
  // invented sites instead: patient i at site i mod 11.
  std::string with_site;
  {
    const auto lines = lines_of(TempDir::read(csv));
    with_site = lines[0] + ",site\n";
    for (std::size_t k = 1; k < lines.size(); ++k) with_site += lines[k] + ",site" + std::to_string(k % 11) + "\n";
  }
  const std::string data = dir.write("diabetes-sites.csv", with_site);
  const std::vector<std::string> common{"folds", data, "--target", "progression", "--folds", "3", "--keep", "4",
                                        "--sample-info", "site", "--groups", "site", "--quiet"};
  auto one = common, two = common;
  one.insert(one.end(), {"--threads", "1", "--out", dir.file("t1")});
  two.insert(two.end(), {"--threads", "2", "--out", dir.file("t2")});
  const auto r1 = pare::test::run(one), r2 = pare::test::run(two);
  INFO(r1.err << r2.err);
  REQUIRE(r1.code == 0);
  REQUIRE(r2.code == 0);
  for (const char* file : {"folds.tsv", "kept-across-folds.tsv", "r1-f2/ranking.tsv", "r1-f2/selection-log.tsv",
                           "r1-f2/reduced.csv", "r1-f2/held-out/reduced.csv"}) {
    INFO(file);
    CHECK(TempDir::read(dir.file("t1/") + file) == TempDir::read(dir.file("t2/") + file));
  }
  const FoldsFile folds = read_folds(dir.file("t1/folds.tsv"));
  std::map<std::string, std::set<int>> by_site;
  for (std::size_t i = 0; i < folds.order.size(); ++i) by_site["site" + std::to_string((i + 1) % 11)].insert(folds.fold.at(1).at(folds.order[i]));
  for (const auto& [site, f] : by_site) {
    INFO(site);
    CHECK(f.size() == 1);
  }
  // The held-out samples.tsv carries the target, as the data wrote it.
  const auto held = lines_of(TempDir::read(dir.file("t1/r1-f1/held-out/samples.tsv")));
  CHECK(held.at(0) == "sample\tprogression\tsite");
  // A split of reduce --samples equals the folds split here too (a target, ranked by spearman).
  std::string training;
  for (const auto& id : folds.order)
    if (folds.fold.at(1).at(id) != 2) training += id + "\n";
  const auto again = pare::test::run({"reduce", data, "--target", "progression", "--keep", "4", "--sample-info", "site",
                                      "--samples", dir.write("train.txt", training), "--out", dir.file("r"), "--quiet"});
  REQUIRE(again.code == 0);
  for (const char* file : {"ranking.tsv", "selection-log.tsv", "reduced.csv"}) {
    INFO(file);
    CHECK(TempDir::read(dir.file("t1/r1-f2/") + file) == TempDir::read(dir.file("r/") + file));
  }
  // Another seed deals other folds.
  auto seeded = common;
  seeded.insert(seeded.end(), {"--seed", "9", "--out", dir.file("t3")});
  REQUIRE(pare::test::run(seeded).code == 0);
  CHECK(TempDir::read(dir.file("t3/folds.tsv")) != TempDir::read(dir.file("t1/folds.tsv")));
}

TEST_CASE("folds: bad options and inputs are clear errors, and write nothing", "[folds]") {
  TempDir dir;
  bool present = false;
  (void)pare::test::wine_table(dir, present);
  if (!present) return;
  const std::string data = dir.file("wine.csv");
  std::string sheet = "sample,class,patient\n";
  // (built piece by piece: g++ 12 warns falsely on "p" + std::to_string(...))
  for (int i = 1; i <= 178; ++i) {
    sheet += 's';
    sheet += std::to_string(i) + ",c" + std::to_string(i % 3) + ",";
    if (i != 40) sheet += 'p';
    if (i != 40) sheet += std::to_string(i / 4);
    sheet += '\n';
  }
  const std::string sheet_path = dir.write("sheet.csv", sheet);
  const std::string out = dir.file("bad");
  struct Case {
    std::vector<std::string> args;
    int code;
    const char* message;
  };
  const std::vector<Case> cases{
      {{"folds", data, "--label", "class", "--folds", "1", "--out", out}, 2, "--folds 1 is below 2"},
      {{"folds", data, "--label", "class", "--folds", "179", "--out", out}, 3, "--folds 179 is more than the 178 samples"},
      {{"folds", data, "--folds", "5", "--out", out}, 2, "folds needs class labels or a target"},
      {{"folds", data, "--label", "class", "--repeats", "0", "--folds", "3", "--out", out}, 2, "--repeats must be 1"},
      {{"folds", data, "--label", "class", "--folds", "3", "--groups", "patient", "--out", out}, 2,
       "--groups patient needs a sample sheet"},
      {{"folds", data, "--label", "class", "--folds", "3", "--out", out, "--labels", sheet_path}, 2,
       "give one of --label, --labels"},
  };
  for (const auto& c : cases) {
    const auto run = pare::test::run(c.args);
    INFO(run.err);
    CHECK(run.code == c.code);
    CHECK(run.err.find(c.message) != std::string::npos);
    CHECK_FALSE(std::filesystem::exists(out));
  }
  // A group column with a gap: sample s40 has no patient (line 41 of the sheet).
  const std::string unlabelled = dir.write("wine-x.csv", [&] {
    std::string text;
    for (const auto& line : lines_of(TempDir::read(data))) text += line.substr(0, line.rfind(',')) + "\n";
    return text;
  }());
  const auto gap = pare::test::run({"folds", unlabelled, "--labels", sheet_path + ":class", "--groups", "patient",
                                    "--folds", "3", "--out", out});
  CHECK(gap.code == 3);
  CHECK(gap.err.find("sheet.csv:41: sample \"s40\" has no value in \"patient\", the --groups column") !=
        std::string::npos);
  CHECK_FALSE(std::filesystem::exists(out));
  const auto no_column = pare::test::run({"folds", unlabelled, "--labels", sheet_path + ":class", "--groups", "site",
                                          "--folds", "3", "--out", out});
  CHECK(no_column.code == 3);
  CHECK(no_column.err.find("no column \"site\" for --groups") != std::string::npos);
}
