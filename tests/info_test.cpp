// Annotation columns (--feature-info, --sample-info) and duplicate feature names on files built
// from public data: the wine and breast cancer tables that Debian's python3-sklearn ships
// (sklearn/datasets/data/wine_data.csv, 178 x 13, and breast_cancer.csv, 569 x 30). The numbers
// are the public data, written into the test files as the dataset's own decimal text; the
// annotation strings (symbols, chromosomes, batches, sites) are invented.
//
// Expected values are those decimal texts converted to float32 by std::strtof (IEEE round to
// nearest, which a correct reader reproduces exactly), so comparisons are exact.
#include <cstdlib>     // std::getenv, std::strtof
#include <filesystem>  // std::filesystem::exists
#include <fstream>     // std::ifstream
#include <map>         // std::map
#include <sstream>     // std::istringstream
#include <string>      // std::string
#include <vector>      // std::vector

#include <catch2/catch.hpp>

#include "pare/error.h"
#include "pare/io.h"
#include "pare/profile.h"
#include "pare/ranking.h"
#include "pare/reduce.h"
#include "support/cli_run.h"
#include "support/temp_dir.h"

namespace {

using pare::FeatureTable;
using pare::Layout;
using pare::ReadOptions;
using pare::test::run;
using pare::test::TempDir;
using Names = std::vector<std::string>;
using Rows = std::vector<Names>;

const std::string kDataDir = "/usr/lib/python3/dist-packages/sklearn/datasets/data/";

bool in_ci() {
  const char* ci = std::getenv("CI");
  return ci != nullptr && std::string(ci) == "true";
}

// A dataset of sklearn's CSV form: a first line "n,p,class names...", then n lines of p values
// and the class index. The cells are kept as the file's text.
struct Dataset {
  Rows cells;            // n x p
  Names classes;         // one per sample: the class name
};

Dataset read_sklearn(const std::string& name, std::size_t n, std::size_t p) {
  const std::string path = kDataDir + name;
  Dataset d;
  std::ifstream f(path);
  if (!f) {
    INFO("dataset file " << path << " is missing; CI=true makes that a failure");
    REQUIRE_FALSE(in_ci());
    WARN("skipped: " << path << " not found (install python3-sklearn)");
    return d;
  }
  std::string line, field;
  std::getline(f, line);
  Names head;
  std::istringstream h(line);
  while (std::getline(h, field, ',')) head.push_back(field);
  REQUIRE(head.size() >= 3);
  REQUIRE(std::stoul(head[0]) == n);
  REQUIRE(std::stoul(head[1]) == p);
  while (std::getline(f, line)) {
    if (line.empty()) continue;
    std::istringstream cells(line);
    Names row;
    while (std::getline(cells, field, ',')) row.push_back(field);
    REQUIRE(row.size() == p + 1);
    d.classes.push_back(head[2 + std::stoul(row.back())]);
    row.pop_back();
    d.cells.push_back(std::move(row));
  }
  REQUIRE(d.cells.size() == n);
  return d;
}

// The wine table's feature names, as sklearn's load_wine gives them.
const Names kWineFeatures = {"alcohol",         "malic_acid",       "ash",
                             "alcalinity_of_ash", "magnesium",      "total_phenols",
                             "flavanoids",      "nonflavanoid_phenols", "proanthocyanins",
                             "color_intensity", "hue",              "od280/od315_of_diluted_wines",
                             "proline"};

std::string sample_id(std::size_t i) { return "w" + std::to_string(i + 1); }

// Invented annotations: a symbol per feature (one holding the delimiter, quoted in the file) and
// a chromosome per feature.
Names wine_symbols() {
  Names s;
  for (std::size_t j = 0; j < kWineFeatures.size(); ++j) s.push_back("WN" + std::to_string(100 + j));
  s[4] = "MG\tmix";  // written quoted
  return s;
}
Names wine_chromosomes() {
  Names c;
  for (std::size_t j = 0; j < kWineFeatures.size(); ++j) c.push_back("chr" + std::to_string(j % 5 + 1));
  return c;
}
// Invented per-sample facts.
std::string batch_of(std::size_t i) { return "plate" + std::to_string(i % 4 + 1); }
std::string site_of(std::size_t i) { return i % 3 == 0 ? "Lyon, FR" : "Porto"; }

std::string field(const std::string& text) {
  if (text.find('\t') == std::string::npos && text.find(',') == std::string::npos) return text;
  std::string quoted = "\"";
  quoted += text;
  quoted += '"';
  return quoted;
}

// Appends a tab and `text` (pieces appended one by one: GCC 12 warns falsely about "\t" + s).
void tab(std::string& out, const std::string& text) {
  out += '\t';
  out += text;
}

// The wine data as a feature-per-line TSV export: the symbol column right after the id, the
// chromosome column among the samples, and the class line (its fields under the text columns
// say "-"). `copies` > 1 repeats the features under new names (w2_alcohol, ...).
std::string wine_by_features(const Dataset& d, int copies = 1, const char* eol = "\n") {
  const std::size_t n = d.cells.size(), middle = n / 2;
  std::string out = "feature\tsymbol";
  for (std::size_t i = 0; i < n; ++i) {
    if (i == middle) out += "\tchromosome";
    tab(out, sample_id(i));
  }
  out += eol;
  out += "class\t-";
  for (std::size_t i = 0; i < n; ++i) {
    if (i == middle) out += "\t-";
    tab(out, d.classes[i]);
  }
  out += eol;
  const Names symbols = wine_symbols(), chromosomes = wine_chromosomes();
  for (int copy = 0; copy < copies; ++copy)
    for (std::size_t j = 0; j < kWineFeatures.size(); ++j) {
      if (copy > 0) {
        out += 'w';
        out += std::to_string(copy + 1);
        out += '_';
      }
      out += kWineFeatures[j];
      tab(out, field(symbols[j]));
      for (std::size_t i = 0; i < n; ++i) {
        if (i == middle) tab(out, chromosomes[j]);
        tab(out, d.cells[i][j]);
      }
      out += eol;
    }
  return out;
}

// The wine data as a sample-per-line TSV: batch after the id, the class, then the features, then
// the site.
std::string wine_by_samples(const Dataset& d) {
  std::string out = "sample\tbatch\tclass";
  for (const auto& name : kWineFeatures) tab(out, name);
  out += "\tsite\n";
  for (std::size_t i = 0; i < d.cells.size(); ++i) {
    out += sample_id(i);
    tab(out, batch_of(i));
    tab(out, d.classes[i]);
    for (const auto& cell : d.cells[i]) tab(out, cell);
    tab(out, field(site_of(i)) + "\n");
  }
  return out;
}

std::string gzip_file(const TempDir& dir, const std::string& name, const std::string& text) {
  const std::string path = dir.file(name);
  pare::OutputFile f(path);
  f.write_gzip(text, 1);
  f.commit();
  return path;
}

// The table's values against the dataset's text, cell by cell, exactly.
void require_wine_values(const FeatureTable& t, const Dataset& d) {
  REQUIRE(t.n_samples() == static_cast<std::int64_t>(d.cells.size()));
  REQUIRE(t.n_features() >= static_cast<std::int64_t>(kWineFeatures.size()));
  for (std::size_t i = 0; i < d.cells.size(); ++i)
    for (std::size_t j = 0; j < kWineFeatures.size(); ++j) {
      INFO("sample " << i << ", feature " << kWineFeatures[j] << ": " << d.cells[i][j]);
      REQUIRE(t.values(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(j)) ==
              std::strtof(d.cells[i][j].c_str(), nullptr));
    }
}

void require_same(const FeatureTable& a, const FeatureTable& b) {
  REQUIRE(a.feature_names == b.feature_names);
  REQUIRE(a.sample_ids == b.sample_ids);
  REQUIRE(a.labels == b.labels);
  REQUIRE(a.feature_info_names == b.feature_info_names);
  REQUIRE(a.feature_info == b.feature_info);
  REQUIRE(a.sample_info_names == b.sample_info_names);
  REQUIRE(a.sample_info == b.sample_info);
  REQUIRE(a.values.rows() == b.values.rows());
  REQUIRE(a.values.cols() == b.values.cols());
  REQUIRE(pare::Matrix(a.values) == pare::Matrix(b.values));
}

Rows tsv_rows(const std::string& text) {
  Rows rows;
  std::size_t start = 0;
  while (start < text.size()) {
    const std::size_t end = text.find('\n', start);
    rows.push_back(pare::split_fields(std::string_view(text).substr(start, end - start), '\t'));
    start = end == std::string::npos ? text.size() : end + 1;
  }
  return rows;
}

// Column `name` of a header row.
std::size_t column_of(const Names& header, const std::string& name) {
  for (std::size_t k = 0; k < header.size(); ++k)
    if (header[k] == name) return k;
  FAIL("no column " << name);
  return 0;
}

std::string reduced_file(const std::string& folder) {
  for (const char* name : {"reduced.tsv", "reduced.csv"})
    if (std::filesystem::exists(folder + "/" + name)) return folder + "/" + name;
  FAIL("no reduced matrix in " << folder);
  return {};
}

}  // namespace

TEST_CASE("wine as a feature-per-line export with annotation columns, and per sample with text columns",
          "[info]") {
  const Dataset d = read_sklearn("wine_data.csv", 178, 13);
  if (d.cells.empty()) return;
  TempDir dir;
  const std::string text = wine_by_features(d);
  const auto path = dir.write("wine-features.tsv", text);
  ReadOptions o;
  o.layout = Layout::kRowsAreFeatures;
  o.label_column = "class";
  o.feature_info = {"chromosome", "symbol"};
  o.threads = 1;
  const FeatureTable f = pare::read_table(path, o);
  REQUIRE(f.delimiter == '\t');
  REQUIRE(f.feature_names == kWineFeatures);
  REQUIRE(f.sample_ids.size() == 178);
  REQUIRE(f.sample_ids.front() == "w1");
  REQUIRE(f.sample_ids.back() == "w178");
  REQUIRE(f.labels == d.classes);
  REQUIRE(f.feature_info_names == Names{"chromosome", "symbol"});
  REQUIRE(f.feature_info == Rows{wine_chromosomes(), wine_symbols()});
  REQUIRE(f.renamed.empty());
  require_wine_values(f, d);

  // The same data per sample, with its text columns declared: the same table.
  ReadOptions s;
  s.label_column = "class";
  s.sample_info = {"batch", "site"};
  s.threads = 1;
  const FeatureTable a = pare::read_table(dir.write("wine-samples.tsv", wine_by_samples(d)), s);
  REQUIRE(a.feature_names == f.feature_names);
  REQUIRE(a.sample_ids == f.sample_ids);
  REQUIRE(a.labels == f.labels);
  REQUIRE(pare::Matrix(a.values) == pare::Matrix(f.values));
  REQUIRE(a.sample_info_names == Names{"batch", "site"});
  REQUIRE(a.sample_info.size() == 2);
  for (std::size_t i = 0; i < 178; ++i) {
    REQUIRE(a.sample_info[0][i] == batch_of(i));
    REQUIRE(a.sample_info[1][i] == site_of(i));
  }

  // gzip (parsed while it inflates), two threads, CRLF, on disk: the same table each time.
  ReadOptions two = o;
  two.threads = 2;
  require_same(f, pare::read_table(gzip_file(dir, "wine-features.tsv.gz", text), two));
  require_same(f, pare::read_table(dir.write("wine-crlf.tsv", wine_by_features(d, 1, "\r\n")), two));
  ReadOptions disk = two;
  disk.memory.bytes = 4096;
  disk.memory.cache_dir = dir.path();
  const FeatureTable on_disk = pare::read_table(gzip_file(dir, "wine-disk.tsv.gz", text), disk);
  REQUIRE(on_disk.values.on_disk());
  require_same(f, on_disk);
  ReadOptions s_two = s;
  s_two.threads = 2;
  require_same(a, pare::read_table(gzip_file(dir, "wine-samples.tsv.gz", wine_by_samples(d)), s_two));

  // Without --feature-info the symbol column is reported as text, with the option to use
  // ("alcohol<TAB>" is 8 bytes: the symbol starts at column 9 of line 3).
  ReadOptions plain = o;
  plain.feature_info.clear();
  try {
    pare::read_table(path, plain);
    FAIL("no error");
  } catch (const pare::Error& e) {
    REQUIRE(e.kind() == pare::ErrorKind::kInput);
    REQUIRE(std::string(e.what()) ==
            path + ":3:9: column \"symbol\" holds text (\"WN100\" on line 3), not numbers (pass `feature_info` "
                   "symbol if it describes the features, e.g. gene symbols or chromosomes)");
  }
  // And per sample without --sample-info: the batch column ("w1<TAB>" is 3 bytes).
  ReadOptions plain_s = s;
  plain_s.sample_info.clear();
  const auto samples_path = dir.file("wine-samples.tsv");
  try {
    pare::read_table(samples_path, plain_s);
    FAIL("no error");
  } catch (const pare::Error& e) {
    REQUIRE(e.kind() == pare::ErrorKind::kInput);
    REQUIRE(std::string(e.what()) ==
            samples_path + ":2:4: column \"batch\" holds text (\"plate1\" on line 2), not numbers (pass `label` "
                           "batch if it holds the classes, or `sample_info` batch to carry it into samples.tsv)");
  }
}

TEST_CASE("annotation columns in a gzip export of several read chunks, parsed while it inflates", "[info]") {
  const Dataset d = read_sklearn("wine_data.csv", 178, 13);
  if (d.cells.empty()) return;
  TempDir dir;
  // 13 x 800 feature lines of about 1 kB: about 10 MB, three or more 4 MiB chunks of the reader
  // (kChunkBytes in src/internal/text_chunks.h), so chunks are parsed as the stream arrives and at
  // its end.
  constexpr int kCopies = 800;
  const std::string text = wine_by_features(d, kCopies);
  INFO("bytes: " << text.size());
  REQUIRE(text.size() > (std::size_t{8} << 20));
  ReadOptions o;
  o.layout = Layout::kRowsAreFeatures;
  o.label_column = "class";
  o.feature_info = {"symbol", "chromosome"};
  o.threads = 1;
  const FeatureTable f = pare::read_table(dir.write("big.tsv", text), o);
  REQUIRE(f.n_features() == 13 * kCopies);
  REQUIRE(f.feature_names.back() == "w800_proline");
  REQUIRE(f.feature_info.size() == 2);
  const Names symbols = wine_symbols(), chromosomes = wine_chromosomes();
  for (std::size_t j = 0; j < f.feature_names.size(); ++j) {
    REQUIRE(f.feature_info[0][j] == symbols[j % 13]);
    REQUIRE(f.feature_info[1][j] == chromosomes[j % 13]);
  }
  require_wine_values(f, d);
  ReadOptions two = o;
  two.threads = 2;
  require_same(f, pare::read_table(gzip_file(dir, "big.tsv.gz", text), two));

  // A stray text cell in the last chunk (a column of numbers above it, so not a text column) is
  // reported at its line, plain or gzip, as a cell that is not a number.
  std::string broken = text;
  const std::string last = "\nw800_proline\tWN112\t";
  const auto at = broken.rfind(last);
  REQUIRE(at != std::string::npos);
  broken.replace(at + last.size(), d.cells[0][12].size(), "many");
  const auto line = std::to_string(2 + 13 * kCopies);  // the header, the class line, then the features
  const auto plain = dir.write("broken.tsv", broken);
  const auto gz = gzip_file(dir, "broken.tsv.gz", broken);
  for (const auto& file : {plain, gz}) {
    try {
      pare::read_table(file, two);
      FAIL("no error");
    } catch (const pare::Error& e) {
      REQUIRE(std::string(e.what()) ==
              file + ":" + line + ":" + std::to_string(last.size()) + ": cannot read \"many\" in column "
                     "\"w800_proline\" as a number (missing values must be one of: an empty field, ?, NA, NaN, nan, "
                     "null; `na` sets the list)");
    }
  }
}

TEST_CASE("ranking.tsv and selection-log.tsv carry the annotation columns after feature", "[info]") {
  const Dataset d = read_sklearn("wine_data.csv", 178, 13);
  if (d.cells.empty()) return;
  TempDir dir;
  ReadOptions o;
  o.layout = Layout::kRowsAreFeatures;
  o.label_column = "class";
  o.feature_info = {"symbol", "chromosome"};
  FeatureTable t = pare::read_table(dir.write("wine.tsv", wine_by_features(d)), o);
  const Names symbols = wine_symbols(), chromosomes = wine_chromosomes();
  std::map<std::string, std::size_t> index;
  for (std::size_t j = 0; j < kWineFeatures.size(); ++j) index[kWineFeatures[j]] = j;
  // Each line's text columns are those of its feature.
  auto check = [&](const std::string& tsv, std::size_t feature_column, std::size_t expected_lines) {
    const Rows rows = tsv_rows(tsv);
    REQUIRE(rows.size() == expected_lines + 1);
    REQUIRE(rows[0][feature_column] == "feature");
    REQUIRE(rows[0][feature_column + 1] == "symbol");
    REQUIRE(rows[0][feature_column + 2] == "chromosome");
    for (std::size_t r = 1; r < rows.size(); ++r) {
      INFO(rows[r][feature_column]);
      const std::size_t j = index.at(rows[r][feature_column]);
      REQUIRE(rows[r][feature_column + 1] == symbols[j]);
      REQUIRE(rows[r][feature_column + 2] == chromosomes[j]);
      REQUIRE(rows[r].size() == rows[0].size());
    }
    return rows;
  };

  pare::ReduceOptions ro;
  ro.prune = false;
  ro.keep = 5;
  FeatureTable supervised = t;
  const pare::Reduction r = pare::reduce(supervised, ro);
  REQUIRE(r.supervised);
  check(pare::reduction_ranking_tsv(supervised, r), 1, 5);
  const Rows log = check(pare::selection_log_tsv(supervised, r), 0, 13);
  REQUIRE(log[0][3] == "index");

  // Without labels (ranked by variance), the same columns.
  FeatureTable unlabelled = t;
  unlabelled.labels.clear();
  const pare::Reduction u = pare::reduce(unlabelled, ro);
  REQUIRE_FALSE(u.supervised);
  check(pare::reduction_ranking_tsv(unlabelled, u), 1, 5);
  check(pare::selection_log_tsv(unlabelled, u), 0, 13);

  // ranking_tsv as `pare rank` calls it, with and without the columns.
  const Rows with = check(pare::ranking_tsv(r.scores, pare::rank_order(r.scores, pare::Criterion::kMi),
                                            t.feature_names, false, t.feature_info_names, t.feature_info),
                          1, r.scores.size());
  const Rows without = tsv_rows(pare::ranking_tsv(r.scores, pare::rank_order(r.scores, pare::Criterion::kMi),
                                                  t.feature_names, false));
  REQUIRE(without[0][2] == "mi");
  REQUIRE(with[0][4] == "mi");
  for (std::size_t k = 0; k < without.size(); ++k) {
    Names stripped = with[k];
    stripped.erase(stripped.begin() + 2, stripped.begin() + 4);
    REQUIRE(stripped == without[k]);
  }
}

TEST_CASE("duplicate feature names: a TSV file reduced, then applied to itself", "[info]") {
  // breast_cancer.csv's 30 columns are 10 measures (radius, texture, ...) as mean, standard error
  // and worst value; named by the measure alone, as some exports do, every name comes three times.
  const Dataset d = read_sklearn("breast_cancer.csv", 569, 30);
  if (d.cells.empty()) return;
  const Names measures = {"radius",    "texture",   "perimeter", "area",     "smoothness",
                          "compactness", "concavity", "concave points", "symmetry", "fractal dimension"};
  TempDir dir;
  std::string text = "sample";
  for (int copy = 0; copy < 3; ++copy)
    for (const auto& m : measures) text += "\t" + m;
  text += "\tdiagnosis\n";
  for (std::size_t i = 0; i < d.cells.size(); ++i) {
    text += "bc" + std::to_string(i + 1);
    for (const auto& cell : d.cells[i]) text += "\t" + cell;
    text += "\t" + d.classes[i] + "\n";
  }
  const auto data = dir.write("cancer.tsv", text);

  // Every command names them alike: the first keeps the name, the others get #2 and #3.
  ReadOptions o;
  o.label_column = "diagnosis";
  const FeatureTable t = pare::read_table(data, o);
  REQUIRE(t.feature_names[0] == "radius");
  REQUIRE(t.feature_names[10] == "radius#2");
  REQUIRE(t.feature_names[29] == "fractal dimension#3");
  REQUIRE(t.renamed.size() == 20);
  REQUIRE(t.renamed[0] == std::pair<std::int64_t, std::string>{10, "radius"});
  // scan flags all 30 (every name was repeated in the file).
  const pare::Profile p = pare::profile_table(t);
  REQUIRE(p.n_duplicate_name == 30);

  const auto reduced = run({"reduce", data, "--label", "diagnosis", "--no-prune", "--out", dir.file("fit")});
  INFO(reduced.err);
  REQUIRE(reduced.code == 0);
  const Rows ranking = tsv_rows(TempDir::read(dir.file("fit/ranking.tsv")));
  const std::size_t feature = column_of(ranking[0], "feature");
  std::size_t renamed_kept = 0;
  for (std::size_t r = 1; r < ranking.size(); ++r) renamed_kept += ranking[r][feature].find('#') != std::string::npos;
  INFO("kept features " << ranking.size() - 1 << ", of them renamed " << renamed_kept);
  REQUIRE(renamed_kept > 0);

  const auto applied = run({"apply", dir.file("fit/plan.json"), data, "--out", dir.file("again")});
  INFO(applied.err);
  REQUIRE(applied.code == 0);
  const std::string fit_matrix = TempDir::read(reduced_file(dir.file("fit")));
  REQUIRE(fit_matrix.find("radius#2") != std::string::npos);
  REQUIRE(TempDir::read(reduced_file(dir.file("again"))) == fit_matrix);
}
