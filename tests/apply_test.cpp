// `pare reduce` then `pare apply`, in process through pare::cli::run, in a temporary folder: the
// plan replays on held-out samples exactly (training fill values, the same transform, the plan's
// columns in order), missing and extra features, damaged plans, thread-independent outputs, and
// the failure paths of SPEC §5-§6 (no output under a final name, the input never touched, exit
// codes 2, 3 and 4).
#include <algorithm>   // std::find
#include <charconv>    // std::to_chars
#include <cmath>       // std::log2, std::sqrt, std::abs
#include <cstdint>     // std::int64_t
#include <cstdlib>     // std::strtof
#include <filesystem>  // std::filesystem::directory_iterator, exists, create_directory
#include <limits>      // std::numeric_limits
#include <random>      // std::mt19937_64
#include <set>         // std::set
#include <sstream>     // std::ostringstream, std::istringstream
#include <string>      // std::string
#include <vector>      // std::vector

#include <catch2/catch.hpp>

#include "cli/commands.h"
#include "support/cli_run.h"
#include "support/temp_dir.h"
#include <nlohmann/json.hpp>

namespace {

using nlohmann::json;
using pare::test::TempDir;

using pare::test::Run;
using pare::test::run;

void require_ok(const Run& r) {
  INFO("exit " << r.code << ", stderr: " << r.err);
  REQUIRE(r.code == 0);
  REQUIRE(r.err.empty());
}

// Exit `code` with one `pare: error: ...` line containing every part of `what`.
void require_error(const Run& r, int code, const std::vector<std::string>& what) {
  INFO("exit " << r.code << ", stderr: " << r.err << "stdout: " << r.out);
  REQUIRE(r.code == code);
  REQUIRE(r.err.rfind("pare: error: ", 0) == 0);
  REQUIRE(r.err.find('\n') == r.err.size() - 1);
  for (const auto& w : what) REQUIRE(r.err.find(w) != std::string::npos);
}

// prefix + number, appended (GCC 12 warns falsely about `"literal" + std::to_string(...)`).
std::string numbered(const char* prefix, std::int64_t v) {
  std::string s(prefix);
  s += std::to_string(v);
  return s;
}

std::vector<std::string> split(const std::string& line, char d) {
  std::vector<std::string> out;
  std::size_t start = 0;
  for (;;) {
    const auto at = line.find(d, start);
    out.push_back(line.substr(start, at == std::string::npos ? std::string::npos : at - start));
    if (at == std::string::npos) return out;
    start = at + 1;
  }
}

std::vector<std::vector<std::string>> read_rows(const std::string& path, char d) {
  std::istringstream in(TempDir::read(path));
  std::vector<std::vector<std::string>> rows;
  std::string line;
  while (std::getline(in, line)) rows.push_back(split(line, d));
  return rows;
}

std::set<std::string> folder_listing(const std::string& dir) {
  std::set<std::string> names;
  if (!std::filesystem::exists(dir)) return names;
  for (const auto& e : std::filesystem::directory_iterator(dir))
    names.insert(e.path().filename().string());
  return names;
}

std::string float_text(float v) {
  char buffer[32];
  const auto res = std::to_chars(buffer, buffer + sizeof buffer, v);
  return std::string(buffer, res.ptr);
}

// A rows=samples data set: positive, log-normal-like values (so --log2 applies), some features
// shifted by class, a correlated module (every 5th feature, also shifted by class), gaps written as
// empty fields or NA. `shift` scales the whole set (held-out samples come from another batch: their
// means differ from the training fill values, so a gap filled from the held-out data would show).
struct Data {
  std::vector<std::string> features;
  std::vector<std::string> ids;
  std::vector<std::string> labels;
  std::vector<std::vector<float>> x;  // [sample][feature], NaN = gap
};

Data make_data(std::size_t n, std::size_t p, std::uint64_t seed, const std::string& prefix,
               double shift, double gap_rate = 0.06) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> normal(0.0, 1.0);
  std::uniform_real_distribution<double> uniform(0.0, 1.0);
  Data d;
  for (std::size_t j = 0; j < p; ++j)
    d.features.push_back(numbered("m", static_cast<std::int64_t>(100 + j)));
  for (std::size_t i = 0; i < n; ++i) {
    d.ids.push_back(prefix + std::to_string(1000 + i));
    d.labels.push_back(i % 3 == 0 ? "dry" : "wet");
    std::vector<float> row;
    const double factor = normal(rng) + (d.labels.back() == "dry" ? 1.0 : 0.0);
    for (std::size_t j = 0; j < p; ++j) {
      const double effect =
          (j % 4 == 0 && d.labels.back() == "dry") ? 0.3 * static_cast<double>(j % 9 + 1) : 0;
      double z = normal(rng) + effect;
      if (j % 5 == 1) z = factor + 0.1 * normal(rng);  // a correlated module
      const double v = shift * std::exp(1.0 + 0.5 * z + 0.02 * static_cast<double>(j % 7));
      row.push_back(uniform(rng) < gap_rate ? std::numeric_limits<float>::quiet_NaN()
                                            : static_cast<float>(v));
    }
    d.x.push_back(row);
  }
  return d;
}

// Writes `d` as CSV: `sample,<features...>,cls` (label last), or only the columns `keep` of the
// features when given, plus `extra` invented columns before the label.
std::string csv_text(const Data& d, const std::vector<std::size_t>* keep = nullptr, int extra = 0,
                     bool one_class = false) {
  std::vector<std::size_t> cols;
  if (keep)
    cols = *keep;
  else
    for (std::size_t j = 0; j < d.features.size(); ++j) cols.push_back(j);
  std::string out = "sample";
  for (int e = 0; e < extra; ++e) out += numbered(",extra", e);
  for (const std::size_t j : cols) out += "," + d.features[j];
  out += ",cls\n";
  for (std::size_t i = 0; i < d.ids.size(); ++i) {
    out += d.ids[i];
    for (int e = 0; e < extra; ++e) out += numbered(",", 7 * e + static_cast<int>(i % 5));
    for (const std::size_t j : cols) {
      const float v = d.x[i][j];
      out += ",";
      if (std::isnan(v))
        out += (i + j) % 2 ? "NA" : "";
      else
        out += float_text(v);
    }
    out += "," + (one_class ? std::string("wet") : d.labels[i]) + "\n";
  }
  return out;
}

struct PlanNumbers {
  std::vector<std::string> names;
  std::vector<double> fill, center, scale;
  bool log2 = false, scale_on = false;
};

PlanNumbers read_plan(const std::string& path) {
  const json plan = json::parse(TempDir::read(path));
  PlanNumbers p;
  p.names = plan.at("kept").at("names").get<std::vector<std::string>>();
  p.fill = plan.at("kept").at("fill").get<std::vector<double>>();
  p.center = plan.at("kept").at("center").get<std::vector<double>>();
  p.scale = plan.at("kept").at("scale").get<std::vector<double>>();
  p.log2 = plan.at("transform").at("log2").get<bool>();
  p.scale_on = plan.at("transform").at("scale").get<bool>();
  return p;
}

std::size_t feature_index(const Data& d, const std::string& name) {
  const auto it = std::find(d.features.begin(), d.features.end(), name);
  REQUIRE(it != d.features.end());
  return static_cast<std::size_t>(it - d.features.begin());
}

// The value a plan gives a raw cell: the training fill for a gap, log2(x + 1) (SPEC §4 step 3,
// computed in double and stored as float32 like every matrix value), then the z-score with the
// plan's centre and scale.
double planned_value(const PlanNumbers& p, std::size_t k, float raw) {
  float v = std::isnan(raw) ? static_cast<float>(p.fill[k]) : raw;
  if (p.log2) v = static_cast<float>(std::log2(static_cast<double>(v) + 1.0));
  double z = v;
  if (p.scale_on) z = (static_cast<double>(v) - p.center[k]) / p.scale[k];
  return z;
}

// Output cells are float32 printed shortest; the expected value is computed here through the same
// steps, so they agree to float32 rounding of the last step: 2^-23 relative, plus 1e-6 absolute for
// z-scores near 0 (whose rounding is relative to the terms subtracted, of order 1).
bool close(double got, double want) {
  return std::abs(got - want) <= 1.2e-7 * std::abs(want) + 1e-6;
}

// Data with n_train + n_test samples, split into train.csv and test.csv.
struct Split {
  Data train, test;
  std::string train_path, test_path;
};

Split write_split(const TempDir& dir) {
  Split s;
  s.train = make_data(45, 16, 42, "T", 1.0);
  s.test = make_data(18, 16, 4242, "H", 2.5);  // another batch: means 2.5x the training ones
  s.train_path = dir.write("train.csv", csv_text(s.train));
  s.test_path = dir.write("test.csv", csv_text(s.test));
  return s;
}

}  // namespace

TEST_CASE("apply: held-out samples get the plan's columns, training fill values and transform",
          "[apply]") {
  TempDir dir;
  const Split s = write_split(dir);
  const std::string fit = dir.file("fit"), out = dir.file("out");
  require_ok(run({"reduce", s.train_path, "--label", "cls", "--log2", "--scale", "--keep", "5",
                  "--out", fit, "--quiet", "--threads", "2"}));
  const PlanNumbers plan = read_plan(fit + "/plan.json");
  REQUIRE(plan.names.size() == 5);
  REQUIRE(plan.log2);
  REQUIRE(plan.scale_on);

  // The plan's numbers are the training ones: fill = mean of the observed training cells; centre
  // and scale = mean and sd (ddof 1, as SPEC §4 defines variance) of the filled, log2 column.
  // 1e-9 relative: the same double sums in a different order.
  for (std::size_t k = 0; k < plan.names.size(); ++k) {
    const std::size_t j = feature_index(s.train, plan.names[k]);
    double sum = 0, count = 0;
    for (const auto& row : s.train.x)
      if (!std::isnan(row[j])) {
        sum += row[j];
        ++count;
      }
    INFO(plan.names[k]);
    REQUIRE(static_cast<float>(plan.fill[k]) == static_cast<float>(sum / count));
    std::vector<double> t;
    for (const auto& row : s.train.x) {
      PlanNumbers raw = plan;
      raw.scale_on = false;
      t.push_back(planned_value(raw, k, row[j]));
    }
    double mean = 0;
    for (double v : t) mean += v;
    mean /= static_cast<double>(t.size());
    double ss = 0;
    for (double v : t) ss += (v - mean) * (v - mean);
    REQUIRE(std::abs(plan.center[k] - mean) <= 1e-9 * std::abs(mean));
    const double sd = std::sqrt(ss / static_cast<double>(t.size() - 1));
    REQUIRE(std::abs(plan.scale[k] - sd) <= 1e-9 * sd);
  }

  require_ok(run({"apply", fit + "/plan.json", s.test_path, "--out", out, "--quiet"}));
  const auto rows = read_rows(out + "/reduced.csv", ',');
  std::vector<std::string> header{"sample"};
  header.insert(header.end(), plan.names.begin(), plan.names.end());
  REQUIRE(rows.at(0) == header);  // ids and numbers only: the labels are in samples.tsv
  const auto samples = read_rows(out + "/samples.tsv", '\t');
  REQUIRE(samples.at(0) == std::vector<std::string>{"sample", "cls"});
  REQUIRE(samples.size() == s.test.ids.size() + 1);
  REQUIRE(rows.size() == s.test.ids.size() + 1);
  std::int64_t gaps_checked = 0;
  for (std::size_t i = 0; i < s.test.ids.size(); ++i) {
    const auto& row = rows[i + 1];
    REQUIRE(row.size() == header.size());
    REQUIRE(row.front() == s.test.ids[i]);
    REQUIRE(samples[i + 1] == std::vector<std::string>{s.test.ids[i], s.test.labels[i]});
    for (std::size_t k = 0; k < plan.names.size(); ++k) {
      const float raw = s.test.x[i][feature_index(s.test, plan.names[k])];
      const double want = planned_value(plan, k, raw);
      const double got = std::strtod(row[k + 1].c_str(), nullptr);
      INFO("sample " << s.test.ids[i] << ", " << plan.names[k] << (std::isnan(raw) ? " (gap)" : "")
                     << ": got " << row[k + 1] << ", expected " << want);
      REQUIRE(close(got, want));
      gaps_checked += std::isnan(raw);
    }
  }
  REQUIRE(gaps_checked > 0);  // the held-out kept columns do have gaps

  // apply-log.tsv: every plan feature present, with its count of filled cells.
  const auto log = read_rows(out + "/apply-log.tsv", '\t');
  REQUIRE(log.size() == plan.names.size() + 1);
  for (std::size_t k = 0; k < plan.names.size(); ++k) {
    std::int64_t gaps = 0;
    for (const auto& row : s.test.x) gaps += std::isnan(row[feature_index(s.test, plan.names[k])]);
    REQUIRE(log[k + 1] == std::vector<std::string>{plan.names[k], "present", std::to_string(gaps)});
  }

  // The plan replayed on its own training file reproduces the training reduced.csv byte for byte.
  const std::string again = dir.file("again");
  require_ok(run({"apply", fit + "/plan.json", s.train_path, "--out", again, "--quiet"}));
  REQUIRE(TempDir::read(again + "/reduced.csv") == TempDir::read(fit + "/reduced.csv"));

  // Extra features (and a different column order) in the new data are ignored.
  std::vector<std::size_t> reversed;
  for (std::size_t j = s.test.features.size(); j-- > 0;) reversed.push_back(j);
  const std::string wider = dir.write("wider.csv", csv_text(s.test, &reversed, 3));
  const std::string out_wider = dir.file("out-wider");
  require_ok(run({"apply", fit + "/plan.json", wider, "--out", out_wider, "--quiet"}));
  REQUIRE(TempDir::read(out_wider + "/reduced.csv") == TempDir::read(out + "/reduced.csv"));
  const Run loud = run({"apply", fit + "/plan.json", wider, "--out", out_wider});
  require_ok(loud);
  INFO(loud.out);
  REQUIRE(loud.out.find("(14 other features ignored)") != std::string::npos);  // 16 + 3 - 5
}

TEST_CASE("apply: features missing from the new data", "[apply]") {
  TempDir dir;
  const Split s = write_split(dir);
  const std::string fit = dir.file("fit");
  require_ok(run({"reduce", s.train_path, "--label", "cls", "--log2", "--keep", "5", "--out", fit,
                  "--quiet"}));
  const PlanNumbers plan = read_plan(fit + "/plan.json");
  REQUIRE(plan.names.size() == 5);
  // Leave out the plan's 2nd and 4th features.
  std::vector<std::size_t> keep;
  for (std::size_t j = 0; j < s.test.features.size(); ++j)
    if (s.test.features[j] != plan.names[1] && s.test.features[j] != plan.names[3])
      keep.push_back(j);
  const std::string partial = dir.write("partial.csv", csv_text(s.test, &keep));
  const std::string out = dir.file("out");
  require_error(
      run({"apply", fit + "/plan.json", partial, "--out", out}), 3,
      {partial,
       "2 of the plan's 5 features are not in the data: " + plan.names[1] + ", " + plan.names[3],
       "--allow-missing-features"});
  REQUIRE(folder_listing(out).empty());

  require_ok(run(
      {"apply", fit + "/plan.json", partial, "--out", out, "--allow-missing-features", "--quiet"}));
  const auto log = read_rows(out + "/apply-log.tsv", '\t');
  REQUIRE(log.at(0) == std::vector<std::string>{"feature", "status", "filled_cells"});
  const std::string n = std::to_string(s.test.ids.size());
  REQUIRE(log.at(2) ==
          std::vector<std::string>{plan.names[1], "absent: filled with the training value", n});
  REQUIRE(log.at(4) ==
          std::vector<std::string>{plan.names[3], "absent: filled with the training value", n});
  REQUIRE(log.at(1).at(1) == "present");
  const auto rows = read_rows(out + "/reduced.csv", ',');
  REQUIRE(rows.at(0).at(2) == plan.names[1]);
  for (std::size_t i = 1; i < rows.size(); ++i)
    for (const std::size_t k : {std::size_t{1}, std::size_t{3}}) {
      const double want = planned_value(plan, k, std::numeric_limits<float>::quiet_NaN());
      INFO("sample line " << i << ", " << plan.names[k] << ": " << rows[i][k + 1] << " vs "
                          << want);
      REQUIRE(close(std::strtod(rows[i][k + 1].c_str(), nullptr), want));
    }
}

TEST_CASE("apply: a damaged plan.json is an input error naming the field or the place", "[apply]") {
  TempDir dir;
  const Split s = write_split(dir);
  const std::string fit = dir.file("fit");
  require_ok(
      run({"reduce", s.train_path, "--label", "cls", "--keep", "4", "--out", fit, "--quiet"}));
  const json good = json::parse(TempDir::read(fit + "/plan.json"));

  const std::vector<std::pair<std::vector<std::string>, json>> edits{
      {{"transform", "log2"}, "yes"},
      {{"kept", "names"}, 12},
      {{"kept", "fill"}, json::array({"a", "b"})},
      {{"read", "layout"}, json::array()},
  };
  for (const auto& [where, value] : edits) {
    json bad = good;
    bad[where[0]][where[1]] = value;
    const std::string path = dir.write("bad.json", bad.dump(1));
    const std::string field = where[0] + "." + where[1];
    INFO(field);
    require_error(run({"apply", path, s.test_path, "--out", dir.file("o")}), 3,
                  {path, "field " + field});
  }
  // Not JSON at all: line 3, column 3 is where the parser stops (the unquoted word).
  const std::string broken = dir.write("broken.json", "{\n  \"pare_plan\": 1,\n  oops\n}\n");
  require_error(run({"apply", broken, s.test_path, "--out", dir.file("o")}), 3,
                {broken + ":3:3: ", "not valid JSON"});
  // A doubled comma: line 2, column 13 is the second comma.
  const std::string comma = dir.write("comma.json", "{\"pare_plan\": 1,\n \"x\": [1, 2,, 3]}");
  require_error(run({"apply", comma, s.test_path, "--out", dir.file("o")}), 3,
                {comma + ":2:13: ", "not valid JSON"});
  // Cut short: the error is just past the end of the text.
  const std::string text = good.dump(1);
  const std::string cut = dir.write("cut.json", text.substr(0, 40));
  std::int64_t line = 1, column = 1;
  for (char c : text.substr(0, 40)) {
    if (c == '\n') {
      ++line;
      column = 1;
    } else {
      ++column;
    }
  }
  require_error(
      run({"apply", cut, s.test_path, "--out", dir.file("o")}), 3,
      {cut + ":" + std::to_string(line) + ":" + std::to_string(column) + ": ", "not valid JSON"});
  REQUIRE(folder_listing(dir.file("o")).empty());
}

TEST_CASE("reduce: outputs do not depend on --threads", "[apply]") {
  TempDir dir;
  // 60 samples x 700 features: OpenMP chunks and pruning blocks both split the work.
  const Data d = make_data(60, 700, 7, "S", 1.0, 0.03);
  const std::string data = dir.write("wide.csv", csv_text(d));
  for (const std::vector<std::string>& extra : {std::vector<std::string>{},
                                                {"--keep", "25", "--log2", "--scale"},
                                                {"--rank-by", "f", "--fdr", "0.5"}}) {
    std::vector<std::string> one{"reduce",  data,    "--label",     "cls",
                                 "--quiet", "--out", dir.file("t1")};
    std::vector<std::string> two{"reduce",  data,    "--label",     "cls",
                                 "--quiet", "--out", dir.file("t2")};
    one.insert(one.end(), extra.begin(), extra.end());
    two.insert(two.end(), extra.begin(), extra.end());
    one.insert(one.end(), {"--threads", "1"});
    two.insert(two.end(), {"--threads", "2"});
    require_ok(run(one));
    require_ok(run(two));
    for (const char* name : {"ranking.tsv", "selection-log.tsv", "reduced.csv"}) {
      INFO(name << " with" << (extra.empty() ? " defaults" : " " + extra[0] + " ..."));
      REQUIRE(TempDir::read(dir.file("t1") + "/" + name) ==
              TempDir::read(dir.file("t2") + "/" + name));
    }
    json a = json::parse(TempDir::read(dir.file("t1") + "/plan.json"));
    json b = json::parse(TempDir::read(dir.file("t2") + "/plan.json"));
    for (json* p : {&a, &b}) {
      p->erase("command_line");
      for (auto& step : p->at("steps")) step.erase("seconds");
    }
    REQUIRE(a == b);
    // The default run prunes the correlated module; the others stop at --keep or --fdr.
    const std::string log = TempDir::read(dir.file("t1") + "/selection-log.tsv");
    REQUIRE(log.find("\tkept\t") != std::string::npos);
    REQUIRE(log.find(extra.empty()          ? "\tredundancy\t"
                     : extra[0] == "--keep" ? "\ttop\t"
                                            : "\trelevance\t") != std::string::npos);
  }
}

TEST_CASE("reduce: failures leave no output and never touch the input", "[apply]") {
  TempDir dir;
  const Split s = write_split(dir);
  const std::string train_bytes = TempDir::read(s.train_path);

  // Every feature filtered out: exit 3, the --out folder (made beforehand) stays empty.
  const std::string out = dir.file("out");
  std::filesystem::create_directory(out);
  require_error(
      run({"reduce", s.train_path, "--label", "cls", "--min-variance", "1e9", "--out", out}), 3,
      {s.train_path, "every feature was filtered out"});
  REQUIRE(folder_listing(out).empty());

  // --out is the input's folder and an output has the input's name: exit 4; the outputs made
  // before the clash (ranking.tsv, selection-log.tsv as temporary files) are gone too.
  TempDir clash;
  const std::string input = clash.write("reduced.csv", train_bytes);
  require_error(run({"reduce", input, "--label", "cls", "--out", clash.path()}), 4,
                {"reduced.csv"});
  REQUIRE(TempDir::read(input) == train_bytes);
  REQUIRE(folder_listing(clash.path()) == std::set<std::string>{"reduced.csv"});
  // The same through a different spelling of the folder.
  require_error(run({"reduce", input, "--label", "cls", "--out", clash.path() + "/./"}), 4,
                {"reduced.csv"});
  REQUIRE(TempDir::read(input) == train_bytes);
  REQUIRE(folder_listing(clash.path()) == std::set<std::string>{"reduced.csv"});

  // Bad command lines: exit 2, nothing written.
  const std::string out2 = dir.file("out2");
  for (const std::vector<std::string>& bad : {std::vector<std::string>{"--max-corr", "2"},
                                              {"--rank-by", "nope"},
                                              {"--no-such-option"},
                                              {"--drop-missing-above", "-0.1"},
                                              {"--keep", "many"}}) {
    std::vector<std::string> args{"reduce", s.train_path, "--label", "cls", "--out", out2};
    args.insert(args.end(), bad.begin(), bad.end());
    INFO(bad[0]);
    require_error(run(args), 2, {});
    REQUIRE(folder_listing(out2).empty());
  }

  // One class: the supervised steps need two.
  const std::string single = dir.write("single.csv", csv_text(s.train, nullptr, 0, true));
  require_error(run({"reduce", single, "--label", "cls", "--out", out2}), 3, {"single.csv", "one class, wet"});
  REQUIRE(folder_listing(out2).empty());
  REQUIRE(TempDir::read(s.train_path) == train_bytes);
}

TEST_CASE("apply: rows=features TSV with a sample sheet replays on its training file", "[apply]") {
  TempDir dir;
  const Data d = make_data(30, 12, 99, "P", 1.0);
  // One feature per line, tab-delimited; labels in a sample sheet listed in another order.
  std::string text = "feature";
  for (const auto& id : d.ids) text += "\t" + id;
  text += "\n";
  for (std::size_t j = 0; j < d.features.size(); ++j) {
    text += d.features[j];
    for (std::size_t i = 0; i < d.ids.size(); ++i) {
      text += '\t';
      text += std::isnan(d.x[i][j]) ? std::string("NA") : float_text(d.x[i][j]);
    }
    text += "\n";
  }
  const std::string data = dir.write("expr.tsv", text);
  std::string sheet_text = "sample,condition\n";
  for (std::size_t i = d.ids.size(); i-- > 0;) sheet_text += d.ids[i] + "," + d.labels[i] + "\n";
  const std::string sheet = dir.write("sheet.csv", sheet_text);
  const std::string fit = dir.file("fit"), out = dir.file("out");
  require_ok(run({"reduce", data, "--layout", "rows=features", "--labels", sheet + ":condition",
                  "--log2", "--scale", "--keep", "4", "--out", fit, "--quiet"}));
  require_ok(run({"apply", fit + "/plan.json", data, "--out", out, "--quiet"}));
  // Tab-separated input gives reduced.tsv. The reduced matrix holds ids and numbers only (the
  // labels from the sheet are in samples.tsv), so the replay on the training file is identical.
  REQUIRE_FALSE(std::filesystem::exists(fit + "/reduced.csv"));
  const auto trained = read_rows(fit + "/reduced.tsv", '\t');
  const auto applied = read_rows(out + "/reduced.tsv", '\t');
  REQUIRE(trained.size() == 1 + 4);
  REQUIRE(applied == trained);
  const PlanNumbers plan = read_plan(fit + "/plan.json");
  for (std::size_t k = 0; k < 4; ++k) REQUIRE(applied[k + 1][0] == plan.names[k]);
}
