// No silent wrong answer (issue 15): rare classes, a plan applied in the wrong layout, missing
// labels and sample lists, the renamed option, what the reduced matrix and the scores file hold,
// the same transform in rank and reduce, option checks before any data is read. The inputs are
// built from public data (Debian python3-sklearn's digits and wine files, CHECKS.md §10) in the
// shapes a user brings: a multi-class sample sheet, a rows=features export, a TSV file.
#include <algorithm>   // std::count
#include <filesystem>  // std::filesystem::exists
#include <map>         // std::map
#include <sstream>     // std::istringstream
#include <string>      // std::string
#include <vector>      // std::vector

#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include "pare/io.h"
#include "support/cli_run.h"
#include "support/public_data.h"
#include "support/temp_dir.h"

namespace {

using pare::test::PublicData;
using pare::test::read_public;
using pare::test::run;
using pare::test::Run;
using pare::test::TempDir;

// A delimited file's lines split into fields.
std::vector<std::vector<std::string>> table_of(const std::string& text, char d) {
  std::vector<std::vector<std::string>> rows;
  std::istringstream in(text);
  std::string line;
  while (std::getline(in, line))
    if (!line.empty()) rows.push_back(pare::split_fields(line, d));
  return rows;
}

// rows=samples text of `data`: id column `id`, features f1..fp, ids s1..sn.
std::string samples_text(const PublicData& data, char d = ',', const std::string& label = "") {
  std::string out = "id";
  for (std::size_t j = 0; j < data.p(); ++j) out += d + std::string("f") + std::to_string(j + 1);
  if (!label.empty()) out += d + label;
  out += '\n';
  for (std::size_t i = 0; i < data.n(); ++i) {
    out += "s" + std::to_string(i + 1);
    for (const auto& v : data.values[i]) out += d + v;
    if (!label.empty()) out += d + std::string("c") + data.classes[i];
    out += '\n';
  }
  return out;
}

// The same data as a rows=features export.
std::string features_text(const PublicData& data, char d = ',') {
  std::string out = "feature";
  for (std::size_t i = 0; i < data.n(); ++i) out += d + std::string("s") + std::to_string(i + 1);
  out += '\n';
  for (std::size_t j = 0; j < data.p(); ++j) {
    out += "f" + std::to_string(j + 1);
    for (std::size_t i = 0; i < data.n(); ++i) out += d + data.values[i][j];
    out += '\n';
  }
  return out;
}

// A sample sheet `sample,class` with the dataset's classes (as c0, c1, ...), `relabel` applied.
std::string sheet_text(const PublicData& data, const std::map<std::size_t, std::string>& relabel = {}) {
  std::string out = "sample,class\n";
  for (std::size_t i = 0; i < data.n(); ++i) {
    const auto it = relabel.find(i);
    out += "s" + std::to_string(i + 1) + "," + (it != relabel.end() ? it->second : "c" + data.classes[i]) + "\n";
  }
  return out;
}

Run ok(const std::vector<std::string>& args) {
  const Run r = run(args);
  INFO("pare " << args.front() << ": exit " << r.code << "\n" << r.err << r.out);
  REQUIRE(r.code == 0);
  return r;
}

nlohmann::json read_json(const std::string& path) { return nlohmann::json::parse(TempDir::read(path)); }

// Column `name` of a TSV/CSV table (header row first).
std::vector<std::string> column(const std::vector<std::vector<std::string>>& t, const std::string& name) {
  const auto& h = t.front();
  const auto at = static_cast<std::size_t>(std::find(h.begin(), h.end(), name) - h.begin());
  REQUIRE(at < h.size());
  std::vector<std::string> out;
  for (std::size_t r = 1; r < t.size(); ++r) out.push_back(t[r][at]);
  return out;
}

}  // namespace

TEST_CASE("trust: a class of one sample no longer zeroes every score", "[trust]") {
  // 200 handwritten digits (10 classes), one sample relabelled into a class of its own: an
  // 11-class sheet with a one-sample class, the shape that made every feature `few_values` and
  // the ranking the file order.
  const PublicData digits = read_public("digits.csv.gz", 0, 200);
  if (!digits.present) return;
  TempDir dir;
  const auto data = dir.write("digits.csv", samples_text(digits));
  const auto sheet = dir.write("sheet.csv", sheet_text(digits, {{17, "rare"}}));
  const Run r = ok({"rank", data, "--labels", sheet, "--out", dir.file("rank")});
  // One warning line naming the rare class.
  INFO(r.err);
  REQUIRE(r.err.find("pare: warning: class rare (1) has fewer than 3 samples") != std::string::npos);
  const auto ranking = table_of(TempDir::read(dir.file("rank/ranking.tsv")), '\t');
  const auto mi = column(ranking, "mi"), f = column(ranking, "f"), index = column(ranking, "index");
  REQUIRE(std::stod(mi[0]) > 0.5);  // the best pixels say a lot about the digit
  REQUIRE(std::stod(f[0]) > 1);
  // Not the file order: the first ranked pixel is not pixel 1 (a constant border pixel).
  REQUIRE(index[0] != "1");

  // --min-class-size 3 leaves the singleton out, says so and lists it in the plan.
  const Run reduced = ok({"reduce", data, "--labels", sheet, "--min-class-size", "3", "--keep", "10",
                          "--out", dir.file("reduce")});
  REQUIRE(reduced.out.find("199 of 200 used") != std::string::npos);
  const auto plan = read_json(dir.file("reduce/plan.json"));
  REQUIRE(plan["samples"]["left_out_small_class"] == nlohmann::json::array({"s18"}));
  REQUIRE(plan["samples"]["small_classes"] == nlohmann::json::array({"rare"}));
  REQUIRE(plan["samples"]["used"] == 199);
}

TEST_CASE("trust: a ranking in which no feature could be scored is an error", "[trust]") {
  TempDir dir;
  // Every feature constant: no score is defined, so a ranking would only be the file order.
  const auto data = dir.write("flat.csv", "id,a,b,group\ns1,1,5,x\ns2,1,5,y\ns3,1,5,x\ns4,1,5,y\n");
  const Run r = run({"rank", data, "--label", "group", "--out", dir.path()});
  INFO(r.err);
  REQUIRE(r.code == 3);
  REQUIRE(r.err.find("no feature could be scored") != std::string::npos);
  // F needs more observed values than classes: two samples in two classes leave it undefined.
  const auto two = dir.write("two.csv", "id,a,b,group\ns1,1,5,x\ns2,2,7,y\n");
  const Run f = run({"rank", two, "--label", "group", "--rank-by", "f", "--out", dir.path()});
  REQUIRE(f.code == 3);
  REQUIRE(f.err.find("no feature could be scored by f") != std::string::npos);
  REQUIRE_FALSE(std::filesystem::exists(dir.file("ranking.tsv")));
}

TEST_CASE("trust: apply refuses a file read in the wrong layout", "[trust]") {
  const PublicData wine = read_public("wine_data.csv", 1);
  if (!wine.present) return;
  TempDir dir;
  const auto train = dir.write("wine.csv", samples_text(wine, ',', "cultivar"));
  ok({"reduce", train, "--label", "cultivar", "--keep", "5", "--out", dir.file("fit")});
  // The same samples exported one feature per line (the usual omics shape), applied with the
  // plan's layout: every plan feature is absent. Filling them all would give every sample the
  // same row; it is refused, and the message names the layout that matches.
  const auto sideways = dir.write("wine-features.csv", features_text(wine));
  const Run r = run({"apply", dir.file("fit/plan.json"), sideways, "--allow-missing-features", "--out", dir.file("a")});
  INFO(r.err);
  REQUIRE(r.code == 3);
  REQUIRE(r.err.find("5 of the plan's 5 features are not in the data") != std::string::npos);
  REQUIRE(r.err.find("read it with --layout rows=features") != std::string::npos);
  REQUIRE_FALSE(std::filesystem::exists(dir.file("a/reduced.csv")));
  // With the layout named, it works and gives back the training rows.
  ok({"apply", dir.file("fit/plan.json"), sideways, "--layout", "rows=features", "--out", dir.file("b")});
  const auto fit = table_of(TempDir::read(dir.file("fit/reduced.csv")), ',');
  const auto applied = table_of(TempDir::read(dir.file("b/reduced.csv")), ',');
  REQUIRE(applied.size() == 6);  // header + the 5 plan features, one per line
  for (std::size_t k = 1; k <= 5; ++k)
    for (std::size_t i = 1; i <= wine.n(); ++i) REQUIRE(applied[k][i] == fit[i][k]);
}

TEST_CASE("trust: the reduced matrix and the scores hold ids and numbers only", "[trust]") {
  const PublicData wine = read_public("wine_data.csv", 1);
  if (!wine.present) return;
  TempDir dir;
  // A TSV file with the label as a column: reduced.tsv, no label column, every cell a number.
  const auto tsv = dir.write("wine.tsv", samples_text(wine, '\t', "cultivar"));
  const Run r = ok({"reduce", tsv, "--label", "cultivar", "--keep", "6", "--components", "2", "--out", dir.file("t")});
  REQUIRE(r.out.find("reduced.tsv") != std::string::npos);
  REQUIRE_FALSE(std::filesystem::exists(dir.file("t/reduced.csv")));
  const auto reduced = table_of(TempDir::read(dir.file("t/reduced.tsv")), '\t');
  REQUIRE(reduced.size() == wine.n() + 1);
  REQUIRE(reduced.front().size() == 7);  // id + 6 features, no label
  for (std::size_t row = 1; row < reduced.size(); ++row)
    for (std::size_t c = 1; c < reduced[row].size(); ++c) REQUIRE_NOTHROW(std::stod(reduced[row][c]));
  const auto plan = read_json(dir.file("t/plan.json"));
  REQUIRE(plan["outputs"]["reduced"] == "reduced.tsv");
  // scores.csv: `sample`, PC1, PC2; the label is in samples.tsv.
  const auto scores = table_of(TempDir::read(dir.file("t/scores.csv")), ',');
  REQUIRE(scores.front() == std::vector<std::string>{"sample", "PC1", "PC2"});
  const auto samples = table_of(TempDir::read(dir.file("t/samples.tsv")), '\t');
  REQUIRE(samples.front()[0] == "sample");
  REQUIRE(samples.front()[1] == "cultivar");
  REQUIRE(samples[1][1] == "c" + wine.classes[0]);

  // rows=features with a label line: no label line in the reduced matrix either.
  std::string features = features_text(wine);
  std::string label_line = "cultivar";
  for (std::size_t i = 0; i < wine.n(); ++i) label_line += ",c" + wine.classes[i];
  features.insert(features.find('\n') + 1, label_line + "\n");
  const auto f = dir.write("wine-features.csv", features);
  ok({"reduce", f, "--layout", "rows=features", "--label", "cultivar", "--keep", "4", "--components", "2",
      "--out", dir.file("f")});
  const auto fr = table_of(TempDir::read(dir.file("f/reduced.csv")), ',');
  REQUIRE(fr.size() == 5);  // header + 4 features
  REQUIRE(fr.front()[0] == "feature");
  for (std::size_t row = 1; row < fr.size(); ++row) REQUIRE(fr[row][0] != "cultivar");
  REQUIRE(table_of(TempDir::read(dir.file("f/scores.csv")), ',').front()[0] == "sample");
}

TEST_CASE("trust: rank --log2 scores as reduce --log2 does", "[trust]") {
  const PublicData wine = read_public("wine_data.csv", 1);
  if (!wine.present) return;
  TempDir dir;
  const auto data = dir.write("wine.csv", samples_text(wine, ',', "cultivar"));
  const Run r = ok({"rank", data, "--label", "cultivar", "--log2", "--out", dir.file("rank")});
  REQUIRE(r.out.find("transform log2(x + 1)") != std::string::npos);
  ok({"reduce", data, "--label", "cultivar", "--log2", "--no-prune", "--out", dir.file("reduce")});
  const auto a = table_of(TempDir::read(dir.file("rank/ranking.tsv")), '\t');
  const auto b = table_of(TempDir::read(dir.file("reduce/ranking.tsv")), '\t');
  // Every feature passes reduce's filters here, so even the q-values agree: byte-identical.
  REQUIRE(a == b);
  // And they differ from the untransformed scores (log2 changes F).
  ok({"rank", data, "--label", "cultivar", "--out", dir.file("raw")});
  REQUIRE(table_of(TempDir::read(dir.file("raw/ranking.tsv")), '\t') != a);
}

TEST_CASE("trust: --samples restricts every command; missing labels leave a sample out", "[trust]") {
  const PublicData wine = read_public("wine_data.csv", 1);
  if (!wine.present) return;
  TempDir dir;
  const auto data = dir.write("wine.csv", samples_text(wine));
  // Sheet: s2 and s5 have no label (empty, NA).
  std::string sheet = sheet_text(wine, {{1, ""}, {4, "NA"}});
  const auto sheet_path = dir.write("sheet.csv", sheet);
  const Run r = ok({"reduce", data, "--labels", sheet_path, "--keep", "5", "--out", dir.file("r")});
  REQUIRE(r.err.find("2 samples without a label left out") != std::string::npos);
  REQUIRE(r.out.find("176 of 178 used") != std::string::npos);
  const auto plan = read_json(dir.file("r/plan.json"));
  REQUIRE(plan["samples"]["left_out_unlabelled"] == nlohmann::json::array({"s2", "s5"}));
  REQUIRE(plan["input"]["samples"] == 176);

  // A list of 60 samples (comments and blank lines ignored).
  std::string list = "# first sixty\n\n";
  for (int i = 1; i <= 60; ++i) list += "s" + std::to_string(i) + "\n";
  const auto list_path = dir.write("train.txt", list);
  for (const char* command : {"scan", "rank", "reduce", "project"}) {
    std::vector<std::string> args{command, data, "--labels", sheet_path, "--samples", list_path,
                                  "--out", dir.file(std::string("l-") + command)};
    if (std::string(command) == "project") args.insert(args.end(), {"--components", "2"});
    ok(args);
  }
  const auto samples = table_of(TempDir::read(dir.file("l-project/samples.tsv")), '\t');
  REQUIRE(samples.size() == 61);
  const auto listed = table_of(TempDir::read(dir.file("l-reduce/samples.tsv")), '\t');
  REQUIRE(listed.size() == 59);  // 60 listed, s2 and s5 without a label
  // apply to the listed samples only.
  ok({"apply", dir.file("r/plan.json"), data, "--samples", list_path, "--out", dir.file("applied")});
  REQUIRE(table_of(TempDir::read(dir.file("applied/reduced.csv")), ',').size() == 61);
  // An id not in the data: the list's file:line.
  const auto bad = dir.write("bad.txt", "s1\n# note\nS2\n");
  const Run e = run({"scan", data, "--samples", bad, "--out", dir.file("x")});
  INFO(e.err);
  REQUIRE(e.code == 3);
  REQUIRE(e.err.rfind("pare: error: " + bad + ":3:1: sample 'S2' is not in " + data, 0) == 0);
}

TEST_CASE("trust: options are checked before the data is read; long options are never abbreviated", "[trust]") {
  TempDir dir;
  // The data file does not exist: a usage error (2) means the option was checked first.
  const std::string absent = dir.file("absent.csv");
  for (const std::vector<std::string>& bad :
       std::vector<std::vector<std::string>>{{"--max-corr", "1.5"},
                                             {"--fdr", "5"},
                                             {"--keep", "-5"},
                                             {"--drop-missing-above", "2"},
                                             {"--bins", "1"},
                                             {"--components", "-1"},
                                             {"--min-class-size", "-1"},
                                             {"--max-cor", "0.5"},
                                             {"--max-missing", "0.2"},
                                             {"--layout", "rows"}}) {
    std::vector<std::string> args{"reduce", absent, "--out", dir.file("o")};
    args.insert(args.end(), bad.begin(), bad.end());
    const Run r = run(args);
    INFO(bad.front() << " " << bad.back() << ": " << r.err);
    REQUIRE(r.code == 2);
  }
  REQUIRE(run({"rank", absent, "--label", "g", "--fdr", "0"}).code == 2);
  REQUIRE(run({"rank", absent, "--label", "g", "--kee", "3"}).code == 2);
  REQUIRE(run({"project", absent, "--components", "0"}).code == 2);
  REQUIRE(run({"scan", absent, "--mark-by", "batch"}).code == 2);
}

TEST_CASE("trust: --fdr with --keep says when fewer than K pass", "[trust]") {
  const PublicData wine = read_public("wine_data.csv", 1);
  if (!wine.present) return;
  TempDir dir;
  const auto data = dir.write("wine.csv", samples_text(wine, ',', "cultivar"));
  const Run r = ok({"rank", data, "--label", "cultivar", "--fdr", "1e-30", "--keep", "12", "--out", dir.path()});
  const auto n = table_of(TempDir::read(dir.file("ranking.tsv")), '\t').size() - 1;
  REQUIRE(n < 12);
  REQUIRE(r.out.find("note: --keep 12 asked for more than the " + std::to_string(n) + " features that pass --fdr 1e-30") !=
          std::string::npos);
  const Run red = ok({"reduce", data, "--label", "cultivar", "--fdr", "1e-30", "--keep", "12", "--out", dir.file("r")});
  REQUIRE(red.out.find("fewer than --keep 12") != std::string::npos);
}

TEST_CASE("trust: help shows placeholders and the steps in order", "[trust]") {
  for (const char* command : {"scan", "rank", "reduce", "project", "apply", "demo"}) {
    const Run r = ok({command, "--help"});
    INFO(r.out);
    REQUIRE(r.out.find(" arg") == std::string::npos);
    REQUIRE(r.out.find("--data") == std::string::npos);
  }
  const Run reduce = ok({"reduce", "--help"});
  REQUIRE(reduce.out.find("steps 0-8") != std::string::npos);
  REQUIRE(reduce.out.find("--keep K") != std::string::npos);
  REQUIRE(reduce.out.find("--fdr Q") != std::string::npos);
  REQUIRE(reduce.out.find("--drop-missing-above FRACTION") != std::string::npos);
  REQUIRE(reduce.out.find("--labels SHEET[:COLUMN]") != std::string::npos);
  REQUIRE(ok({"--help"}).out.find("then scan, reduce and fold it") != std::string::npos);
}

TEST_CASE("trust: mistakes a new user makes get a message, not a meaningless result", "[trust]") {
  const PublicData wine = read_public("wine_data.csv", 1);
  if (!wine.present) return;
  TempDir dir;
  const auto data = dir.write("wine.csv", samples_text(wine, ',', "cultivar"));
  // --fdr has no test to filter on when ranking by variance, or without labels.
  REQUIRE(run({"rank", data, "--label", "cultivar", "--rank-by", "variance", "--fdr", "0.05"}).code == 2);
  REQUIRE(run({"reduce", data, "--rank-by", "variance", "--fdr", "0.05"}).code == 2);
  REQUIRE(run({"reduce", data, "--fdr", "0.05", "--out", dir.file("x")}).code == 2);
  REQUIRE(run({"reduce", data, "--seed", "-3"}).code == 2);
  // More components than the kept features allow: an input error naming both counts.
  const Run pca = run({"reduce", data, "--label", "cultivar", "--keep", "2", "--components", "5", "--out", dir.file("c")});
  INFO(pca.err);
  REQUIRE(pca.code == 3);
  REQUIRE(pca.err.find("--components 5 asks for more than 2 kept features and 178 samples allow") != std::string::npos);
  // Class names with a trailing space, and a measurement given as a label, are warned about.
  std::string spaced = samples_text(wine, ',', "cultivar");
  for (std::size_t at = spaced.find(",c1\n"); at != std::string::npos; at = spaced.find(",c1\n", at + 1)) {
    spaced.replace(at, 4, ",c1 \n");
    break;
  }
  const Run ws = ok({"rank", dir.write("spaced.csv", spaced), "--label", "cultivar", "--out", dir.file("ws")});
  REQUIRE(ws.err.find("class 'c1 ' starts or ends with a space, so it is a class of its own, apart from 'c1'") !=
          std::string::npos);
  REQUIRE(ws.out.find("classes: cultivar - c0 59, c1 70, c1  1, c2 48") != std::string::npos);
  // Proline (column 13, hundreds of distinct values) given as the label.
  std::string measured = "id";
  for (int j = 1; j <= 12; ++j) measured += ",f" + std::to_string(j);
  measured += ",proline\n";
  for (std::size_t i = 0; i < wine.n(); ++i) {
    measured += "s" + std::to_string(i + 1);
    for (const auto& v : wine.values[i]) measured += "," + v;
    measured += "\n";
  }
  const Run m = run({"rank", dir.write("measured.csv", measured), "--label", "proline", "--out", dir.file("m")});
  INFO(m.err);
  REQUIRE(m.err.find("distinct numbers among 178 samples: as labels they are that many classes") != std::string::npos);
  // scan --log2 on negative values: the same error as the other commands.
  std::string negative = "id,a,b\ns1,1,-2\ns2,2,3\ns3,3,4\n";
  const Run neg = run({"scan", dir.write("neg.csv", negative), "--log2", "--out", dir.file("n")});
  REQUIRE(neg.code == 3);
  REQUIRE(neg.err.find("feature b has negative values (min -2)") != std::string::npos);
  // A decimal comma in a semicolon file.
  const Run comma = run({"scan", dir.write("semi.csv", "id;a;b\ns1;1,5;2\ns2;3;4\n"), "--out", dir.file("s")});
  REQUIRE(comma.code == 3);
  REQUIRE(comma.err.find("pare reads a decimal point") != std::string::npos);
}

TEST_CASE("trust: apply detects the new file's delimiter and takes the plan's columns where present", "[trust]") {
  const PublicData wine = read_public("wine_data.csv", 1);
  if (!wine.present) return;
  TempDir dir;
  // Trained on a TSV export with a batch column; held-out samples arrive as CSV without it.
  std::string train = "id\tbatch";
  for (std::size_t j = 0; j < wine.p(); ++j) train += "\tf" + std::to_string(j + 1);
  train += "\tcultivar\n";
  for (std::size_t i = 0; i < 120; ++i) {
    train += "s" + std::to_string(i + 1) + (i % 2 ? "\tA" : "\tB");
    for (const auto& v : wine.values[i]) train += "\t" + v;
    train += "\tc" + wine.classes[i] + "\n";
  }
  ok({"reduce", dir.write("train.tsv", train), "--label", "cultivar", "--sample-info", "batch", "--keep", "4",
      "--out", dir.file("fit")});
  PublicData held = wine;
  held.values.erase(held.values.begin(), held.values.begin() + 120);
  held.classes.erase(held.classes.begin(), held.classes.begin() + 120);
  const Run r = ok({"apply", dir.file("fit/plan.json"), dir.write("held.csv", samples_text(held)), "--out", dir.file("a")});
  REQUIRE(r.out.find("4 of the plan's 4 features present") != std::string::npos);
  const auto reduced = table_of(TempDir::read(dir.file("a/reduced.csv")), ',');
  REQUIRE(reduced.size() == held.n() + 1);
  REQUIRE(reduced.front().size() == 5);
}
