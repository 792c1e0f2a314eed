// --memory: a matrix past the budget lives in a cache file and every step works through column
// blocks; the outputs must be byte-identical to the in-memory run. Also the pieces underneath:
// Columns on disk, the page release helpers and --memory's size syntax.

#include <cmath>       // std::isnan
#include <cstdint>     // std::int64_t
#include <filesystem>  // std::filesystem::directory_iterator
#include <random>      // std::mt19937_64
#include <stdexcept>   // std::runtime_error
#include <string>      // std::string
#include <vector>      // std::vector

#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include "cli/options.h"
#include "internal/columns.h"
#include "internal/gzip.h"
#include "pare/error.h"
#include "pare/matrix.h"
#include "support/cli_run.h"
#include "support/temp_dir.h"

namespace {

using pare::test::run;
using pare::test::TempDir;

// Seeded labelled data with every kind of work for the pipeline: class signal, gaps, redundant
// copies, constant and mostly-missing columns. rows=samples or rows=features.
std::string make_csv(int n, int p, bool rows_are_samples, std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> normal(0.0, 1.0);
  std::vector<std::vector<std::string>> cell(static_cast<std::size_t>(n), std::vector<std::string>(static_cast<std::size_t>(p)));
  std::vector<int> group(static_cast<std::size_t>(n));
  for (int i = 0; i < n; ++i) group[static_cast<std::size_t>(i)] = i % 3 == 0 ? 1 : 0;
  std::vector<double> base(static_cast<std::size_t>(n));
  for (int j = 0; j < p; ++j) {
    const int kind = j % 11;
    if (kind != 5)  // kind 5: a noisy copy of the column before
      for (auto& b : base) b = normal(rng);
    for (int i = 0; i < n; ++i) {
      double v = base[static_cast<std::size_t>(i)];
      if (kind == 5) v += 0.1 * normal(rng);
      if (kind == 1 || kind == 2) v += 1.5 * group[static_cast<std::size_t>(i)];
      if (kind == 7) v = 4.25;
      const bool gap = (kind == 9 && i % 2 == 0) || (rng() % 50 == 0);
      char text[32];
      std::snprintf(text, sizeof text, "%.5g", 10 + v);
      cell[static_cast<std::size_t>(i)][static_cast<std::size_t>(j)] = gap ? "NA" : text;
    }
  }
  std::string out;
  if (rows_are_samples) {
    out = "sample";
    for (int j = 0; j < p; ++j) out += ",f" + std::to_string(j + 1);
    out += ",group\n";
    for (int i = 0; i < n; ++i) {
      out += "s" + std::to_string(i + 1);
      for (int j = 0; j < p; ++j) out += "," + cell[static_cast<std::size_t>(i)][static_cast<std::size_t>(j)];
      out += group[static_cast<std::size_t>(i)] ? ",case\n" : ",control\n";
    }
  } else {
    out = "feature";
    for (int i = 0; i < n; ++i) out += ",s" + std::to_string(i + 1);
    out += "\ngroup";
    for (int i = 0; i < n; ++i) out += group[static_cast<std::size_t>(i)] ? ",case" : ",control";
    out += "\n";
    for (int j = 0; j < p; ++j) {
      out += "f" + std::to_string(j + 1);
      for (int i = 0; i < n; ++i) out += "," + cell[static_cast<std::size_t>(i)][static_cast<std::size_t>(j)];
      out += "\n";
    }
  }
  return out;
}

// plan.json without what differs between two runs of the same reduction: the command line and
// the step timings.
std::string plan_without_run_details(const std::string& text) {
  nlohmann::json plan = nlohmann::json::parse(text);
  plan.erase("command_line");
  for (auto& step : plan["steps"]) step.erase("seconds");
  return plan.dump(1);
}

// Runs `args` + --out DIR twice, in memory and with --memory `budget`, and requires the same
// files with the same bytes (report.html, which carries the run's timings, and plan.json up to
// its command line and timings excepted).
void require_same_outputs(const TempDir& dir, std::vector<std::string> args, const std::string& budget,
                          const std::string& tag) {
  auto in_memory = args, on_disk = args;
  const std::string a = dir.file(tag + "-memory"), b = dir.file(tag + "-disk");
  in_memory.insert(in_memory.end(), {"--out", a});
  on_disk.insert(on_disk.end(), {"--out", b, "--memory", budget, "--cache-dir", dir.path()});
  const auto ra = run(in_memory);
  INFO(tag << ": " << ra.err);
  REQUIRE(ra.code == 0);
  const auto rb = run(on_disk);
  INFO(tag << " with --memory " << budget << ": " << rb.err);
  REQUIRE(rb.code == 0);
  int files = 0;
  for (const auto& entry : std::filesystem::directory_iterator(a)) {
    const std::string name = entry.path().filename().string();
    if (name == "report.html") continue;
    INFO(tag << ": " << name);
    ++files;
    const std::string x = TempDir::read(entry.path().string()), y = TempDir::read(b + "/" + name);
    if (name == "plan.json")
      REQUIRE(plan_without_run_details(x) == plan_without_run_details(y));
    else
      REQUIRE(x == y);
  }
  REQUIRE(files >= 1);
  // The cache file was unlinked as soon as it was made: nothing is left in the cache folder.
  for (const auto& entry : std::filesystem::directory_iterator(dir.path()))
    REQUIRE(entry.path().filename().string().rfind(".pare-cache", 0) == std::string::npos);
}

}  // namespace

TEST_CASE("memory: every command gives the same bytes with the matrix on disk", "[memory]") {
  TempDir dir;
  // 240 samples x 700 features: 672,000 bytes as float32; a 64K budget puts it on disk, and the
  // kept set of a --keep 40 run fits.
  const std::string wide = dir.write("wide.csv", make_csv(240, 700, true, 7));
  const std::string tall = dir.write("tall.csv", make_csv(240, 700, false, 8));
  const std::string text = make_csv(240, 700, true, 9);
  const std::string packed = dir.write("packed.csv.gz", pare::internal::gzip(text, 6));

  require_same_outputs(dir, {"reduce", wide, "--label", "group", "--keep", "40", "--components", "5"}, "64K",
                       "reduce-samples");
  require_same_outputs(dir, {"reduce", tall, "--layout", "rows=features", "--label", "group", "--keep", "40",
                             "--components", "3", "--impute", "median", "--log2"},
                       "64K", "reduce-features");
  require_same_outputs(dir, {"reduce", packed, "--label", "group", "--keep", "40", "--components", "4"}, "100K",
                       "reduce-gzip");
  require_same_outputs(dir, {"project", wide, "--label", "group", "--components", "6"}, "64K", "project");
  require_same_outputs(dir, {"rank", wide, "--label", "group"}, "64K", "rank");
  require_same_outputs(dir, {"scan", tall, "--layout", "rows=features", "--label", "group"}, "64K", "scan");
}

TEST_CASE("memory: a kept set larger than the budget stops with a clear error", "[memory]") {
  TempDir dir;
  const std::string data = dir.write("d.csv", make_csv(240, 700, true, 3));
  // Without --keep about 600 features survive: 600 x 240 x 4 bytes = 576 KB, over 64K.
  const auto r = run({"reduce", data, "--label", "group", "--memory", "64K", "--cache-dir", dir.path(), "--out",
                      dir.file("out")});
  INFO(r.err);
  REQUIRE(r.code == 2);
  REQUIRE(r.err.find("--memory") != std::string::npos);
  REQUIRE(r.err.find("--keep") != std::string::npos);
  REQUIRE(r.err.find('\n') == r.err.size() - 1);
  REQUIRE(!std::filesystem::exists(dir.file("out/plan.json")));
}

TEST_CASE("memory: Columns on disk behave like memory", "[memory]") {
  TempDir dir;
  pare::MemoryBudget budget;
  budget.bytes = 1;  // nothing fits
  budget.cache_dir = dir.path();
  pare::Columns c;
  c.allocate(1000, 600, budget);
  REQUIRE(c.on_disk());
  REQUIRE(pare::internal::any_on_disk());
  REQUIRE(c.rows() == 1000);
  REQUIRE(c.cols() == 600);
  REQUIRE(c(999, 599) == 0.0f);  // fresh storage is zero
  for (Eigen::Index j = 0; j < c.cols(); ++j)
    for (Eigen::Index i = 0; i < c.rows(); ++i) c(i, j) = static_cast<float>(i * 1000 + j);
  // Giving pages back never loses values: they come back from the file.
  c.release_all();
  pare::internal::release_column_span(c, 10, 20);
  pare::internal::release_pages(c.data() + 12345, 7);
  double sum = 0;
  for (Eigen::Index j = 0; j < c.cols(); ++j)
    for (Eigen::Index i = 0; i < c.rows(); ++i) sum += c(i, j) - static_cast<float>(i * 1000 + j);
  REQUIRE(sum == 0);
  // A copy lives in memory and is independent.
  pare::Columns copy = c;
  REQUIRE(!copy.on_disk());
  copy(5, 5) = -1;
  REQUIRE(c(5, 5) == 5005.0f);
  // Moving keeps the file; the cache file never shows in the folder.
  pare::Columns moved = std::move(c);
  REQUIRE(moved.on_disk());
  REQUIRE(moved(7, 3) == 7003.0f);
  REQUIRE(c.size() == 0);
  REQUIRE(std::filesystem::is_empty(dir.path()));
  // In memory when it fits, and release is then a no-op that must not touch values.
  pare::Columns small;
  budget.bytes = 1 << 20;
  small.allocate(10, 10, budget);
  REQUIRE(!small.on_disk());
  small(3, 3) = 2.5f;
  pare::internal::release_column_span(small, 0, 9);
  REQUIRE(small(3, 3) == 2.5f);
}

TEST_CASE("memory: a cache folder that cannot be written is an output error", "[memory]") {
  pare::MemoryBudget budget;
  budget.bytes = 1;
  budget.cache_dir = "/nonexistent-folder-for-pare";
  pare::Columns c;
  try {
    c.allocate(10, 10, budget);
    FAIL("no error");
  } catch (const pare::Error& e) {
    REQUIRE(e.kind() == pare::ErrorKind::kOutput);
    REQUIRE(std::string(e.what()).find("`cache_dir`") != std::string::npos);
  }
}

TEST_CASE("memory: --memory sizes", "[memory]") {
  using pare::cli::parse_size;
  REQUIRE(parse_size("500M", "--memory") == 500LL << 20);
  REQUIRE(parse_size("2G", "--memory") == 2LL << 30);
  REQUIRE(parse_size("2g", "--memory") == 2LL << 30);
  REQUIRE(parse_size("1.5GiB", "--memory") == 3LL << 29);
  REQUIRE(parse_size("64KB", "--memory") == 64LL << 10);
  REQUIRE(parse_size("1T", "--memory") == 1LL << 40);
  REQUIRE(parse_size("123456", "--memory") == 123456);
  REQUIRE(parse_size("4096B", "--memory") == 4096);
  for (const char* bad : {"", "G", "-1G", "0", "12X", "1.5.5G", "nan", "1e30G"}) {
    INFO(bad);
    REQUIRE_THROWS_AS(parse_size(bad, "--memory"), pare::Error);
  }
  TempDir dir;
  const auto r = run({"scan", dir.write("d.csv", "id,a\ns1,1\ns2,2\n"), "--memory", "lots", "--out", dir.file("o")});
  REQUIRE(r.code == 2);
  REQUIRE(r.err.find("--memory lots is not a size") != std::string::npos);
  const auto r2 = run({"scan", dir.file("d.csv"), "--cache-dir", dir.path(), "--out", dir.file("o")});
  REQUIRE(r2.code == 2);
  REQUIRE(r2.err.find("--cache-dir is only used with --memory") != std::string::npos);
}
