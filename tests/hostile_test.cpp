// Hostile and damaged input: every case ends in one clear error line with the right exit code,
// or in correct handling; never a crash, a hang or a half-written output. Cases found by fuzzing
// (tests/fuzz) are kept here as regression tests.

#include <cstdint>     // std::uint64_t
#include <filesystem>  // std::filesystem::exists
#include <set>         // std::set
#include <string>      // std::string
#include <tuple>       // std::tuple
#include <utility>     // std::pair
#include <vector>      // std::vector

#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include "internal/format.h"
#include "internal/gzip.h"
#include "pare/io.h"
#include "support/cli_run.h"
#include "support/temp_dir.h"

namespace {

using pare::test::run;
using pare::test::TempDir;

// Exactly one line on stderr, exit `code`, nothing on stdout.
void require_one_error(const pare::test::Run& r, int code) {
  INFO("exit " << r.code << ", stderr: " << r.err << "stdout: " << r.out);
  REQUIRE(r.code == code);
  REQUIRE(!r.err.empty());
  REQUIRE(r.err.find('\n') == r.err.size() - 1);
  REQUIRE(r.out.empty());
}

}  // namespace

TEST_CASE("hostile: an argument holding a Boost placeholder does not loop (found by fuzzing)", "[hostile]") {
  TempDir dir;
  const std::string data = dir.write("d.csv", "sample,a,b,label\ns1,1,2,x\ns2,2,1,y\n");
  for (const char* arg : {"-%original_token%x", "--%canonical_option%", "%option%%value%", "-k%prefix%"}) {
    INFO(arg);
    const auto r = run({"reduce", data, "--label", "label", arg, "--out", dir.file("o")});
    require_one_error(r, 2);
  }
}

TEST_CASE("hostile: a plan.json number beyond double's range is an input error (found by fuzzing)", "[hostile]") {
  TempDir dir;
  const std::string plan = dir.write("plan.json", "{\"pare_plan\": 1, \"seed\": 3.0e677}");
  const std::string data = dir.write("d.csv", "sample,a\ns1,1\ns2,2\n");
  const auto r = run({"apply", plan, data, "--out", dir.file("o")});
  require_one_error(r, 3);
  REQUIRE(r.err.find("plan.json") != std::string::npos);
}

TEST_CASE("hostile: NUL bytes, binary garbage and names that are not UTF-8", "[hostile]") {
  TempDir dir;
  using namespace std::string_literals;
  struct Case {
    const char* name;
    std::string text;
    std::vector<std::string> extra;
    const char* where;  // expected start of the message after the path
    const char* what;
  };
  const std::vector<Case> cases = {
      {"nul.csv", "sample,a\0b,c\ns1,1,2\ns2,3,4\n"s, {}, ":1:8:", "holds a NUL byte"},
      {"latin1.csv", "sample,gr\xE9n,c\ns1,1,2\ns2,3,4\n", {}, ":1:8:", "is not valid UTF-8"},
      {"id.csv", "sample,a\ns\xFF,1\ns2,3\n", {}, ":2:1:", "sample id"},
      {"label.csv", "sample,a,g\ns1,1,x\ns2,3,\xC3\x28\n", {"--label", "g"}, ":3:", "label"},
      {"feature.csv", "feature,s1,s2\nok,1,2\nbad\xED\xA0\x80,3,4\n", {"--layout", "rows=features"}, ":3:1:",
       "feature name"},
      {"overlong.csv", "sample,\xC0\xAF,c\ns1,1,2\n", {}, ":1:8:", "is not valid UTF-8"},
  };
  for (const auto& c : cases) {
    INFO(c.name);
    std::vector<std::string> args{"scan", dir.write(c.name, c.text), "--out", dir.file("o")};
    args.insert(args.end(), c.extra.begin(), c.extra.end());
    const auto r = run(args);
    require_one_error(r, 3);
    REQUIRE(r.err.find(std::string(c.name) + c.where) != std::string::npos);
    REQUIRE(r.err.find(c.what) != std::string::npos);
    REQUIRE(r.err.find('\0') == std::string::npos);
  }
  // Binary garbage: one printable line, whatever the bytes.
  std::string garbage;
  std::uint64_t x = 88172645463325252ULL;
  for (int i = 0; i < 5000; ++i) {
    x ^= x << 13, x ^= x >> 7, x ^= x << 17;  // xorshift64
    garbage += static_cast<char>(x & 0xFF);
  }
  const auto r = run({"reduce", dir.write("garbage.csv", garbage), "--out", dir.file("o")});
  require_one_error(r, 3);
  for (const char ch : r.err.substr(0, r.err.size() - 1))
    REQUIRE(static_cast<unsigned char>(ch) >= 0x20);
  // A sheet with a bad id is refused the same way.
  const std::string data = dir.write("d.csv", "sample,a\ns1,1\ns2,2\n");
  const auto s = run({"reduce", data, "--labels", dir.write("sheet.csv", "sample,group\ns1,x\ns\xFE,y\n"), "--out",
                      dir.file("o")});
  require_one_error(s, 3);
  REQUIRE(s.err.find("sheet.csv:3:1:") != std::string::npos);
}

TEST_CASE("hostile: devices are refused instead of read forever", "[hostile]") {
  TempDir dir;
  for (const std::vector<std::string>& args : {std::vector<std::string>{"scan"}, {"reduce"}, {"project", "--components", "1"}}) {
    INFO(args[0]);
    auto full = args;
    full.insert(full.end(), {"/dev/zero", "--out", dir.file("o")});
    const auto r = run(full);
    require_one_error(r, 3);
    REQUIRE(r.err.find("/dev/zero: is not a regular file") != std::string::npos);
  }
}

TEST_CASE("hostile: a gzip bomb is stopped by the memory budget", "[hostile]") {
  TempDir dir;
  // 64 MB of zeros after a header compresses to about 64 KB; --memory 64K allows 256 x 64 KiB =
  // 16.8 MB of text, so it stops early, long before the kernel would have to.
  std::string text = "sample,a\n";
  text.append(64 << 20, '0');
  const std::string bomb = dir.write("bomb.csv.gz", pare::internal::gzip(text, 9));
  const auto r = run({"scan", bomb, "--memory", "64K", "--cache-dir", dir.path(), "--out", dir.file("o")});
  require_one_error(r, 3);
  REQUIRE(r.err.find("inflates past 16.8 MB") != std::string::npos);
  REQUIRE(r.err.find("decompression bomb") != std::string::npos);
  REQUIRE(!std::filesystem::exists(dir.file("o/profile.tsv")));
}

namespace {

// Splits delimited text into records, honouring quotes (a quoted field may hold line breaks),
// and each record into fields with pare's own field reader.
std::vector<std::vector<std::string>> records(const std::string& text, char delimiter) {
  std::vector<std::vector<std::string>> out;
  std::size_t start = 0;
  bool quoted = false;
  for (std::size_t i = 0; i < text.size(); ++i) {
    if (text[i] == '"') quoted = !quoted;
    if (text[i] == '\n' && !quoted) {
      out.push_back(pare::split_fields(std::string_view(text).substr(start, i - start), delimiter));
      start = i + 1;
    }
  }
  return out;
}

}  // namespace

TEST_CASE("hostile: names with delimiters, quotes, tabs, line breaks and formula starts round-trip", "[hostile]") {
  TempDir dir;
  const std::vector<std::string> names = {"a,b", "q\"uote", "tab\there", "new\nline", "=SUM(A1)", "+1",
                                          "-x",  "@cmd",    "'=quoted",  "plain",     "semi;colon", "'ok"};
  const std::vector<std::string> ids = {"=id1", "id\t2", "id,3", "\"id4\"", "id5", "-6", "@7", "id8",
                                        "id9",  "id10",  "id11", "id12"};
  auto quote = [](const std::string& s) {
    std::string q = "\"";
    for (char c : s) {
      if (c == '"') q += '"';
      q += c;
    }
    return q + "\"";
  };
  // The input is written the way pare writes: guarded (a leading apostrophe before = + - @, and
  // before an apostrophe that precedes one), then quoted.
  auto guard = [](const std::string& s) {
    std::string g;
    if (pare::internal::needs_formula_guard(s)) g += '\'';
    g += s;
    return g;
  };
  std::string csv = "sample";
  for (const auto& n : names) {
    csv += ',';
    csv += quote(guard(n));
  }
  csv += ",group\n";
  std::uint64_t x = 12345;
  for (std::size_t i = 0; i < ids.size(); ++i) {
    csv += quote(guard(ids[i]));
    for (std::size_t j = 0; j < names.size(); ++j) {
      x ^= x << 13, x ^= x >> 7, x ^= x << 17;
      csv += ',';
      csv += std::to_string(static_cast<double>(x % 1000) / 100.0 + static_cast<double>(i % 2) * (j < 4 ? 3 : 0));
    }
    csv += i % 2 ? ",b\n" : ",a\n";
  }
  const std::string data = dir.write("names.csv", csv);
  // The reader undoes CSV quoting exactly.
  pare::ReadOptions read;
  read.label_column = "group";
  const pare::FeatureTable t = pare::read_table(data, read);
  REQUIRE(t.feature_names == names);
  REQUIRE(t.sample_ids == ids);

  const auto r = run({"reduce", data, "--label", "group", "--no-prune", "--components", "2", "--out", dir.file("o")});
  INFO(r.err);
  REQUIRE(r.code == 0);
  // Every output that lists names gives them back exactly.
  // (reduced.csv holds ids and numbers only: read it without the label column)
  const pare::FeatureTable reduced = pare::read_table(dir.file("o/reduced.csv"), pare::ReadOptions{});
  REQUIRE(std::set<std::string>(reduced.feature_names.begin(), reduced.feature_names.end()) ==
          std::set<std::string>(names.begin(), names.end()));
  REQUIRE(reduced.sample_ids == ids);
  for (const auto& [file, delimiter, column, expected] :
       {std::tuple{"ranking.tsv", '\t', 1, &names}, {"selection-log.tsv", '\t', 0, &names},
        {"loadings.tsv", '\t', 0, &names}, {"scores.csv", ',', 0, &ids}, {"samples.tsv", '\t', 0, &ids}}) {
    INFO(file);
    const auto rows = records(TempDir::read(dir.file(std::string("o/") + file)), delimiter);
    std::set<std::string> seen;
    for (std::size_t i = 1; i < rows.size(); ++i) seen.insert(rows[i][static_cast<std::size_t>(column)]);
    REQUIRE(seen == std::set<std::string>(expected->begin(), expected->end()));
  }
  // Safe by default: no field starts with a formula character; --raw-names writes them as they are.
  const std::string text = TempDir::read(dir.file("o/reduced.csv"));
  REQUIRE(text.find("'=SUM(A1)") != std::string::npos);
  REQUIRE(text.find("\n'=id1,") != std::string::npos);
  REQUIRE(text.find(",-x") == std::string::npos);
  REQUIRE(text.find(",'-x") != std::string::npos);
  REQUIRE(text.find(",''=quoted") != std::string::npos);  // an apostrophe already there is kept
  REQUIRE(run({"reduce", data, "--label", "group", "--no-prune", "--raw-names", "--out", dir.file("raw")}).code == 0);
  const std::string raw = TempDir::read(dir.file("raw/reduced.csv"));
  REQUIRE(raw.find(",=SUM(A1)") != std::string::npos);
  REQUIRE(raw.find("\n=id1,") != std::string::npos);
  // The guard is back on for the next run, and apply matches the names through it.
  const auto a = run({"apply", dir.file("o/plan.json"), data, "--out", dir.file("applied")});
  INFO(a.err);
  REQUIRE(a.code == 0);
  REQUIRE(TempDir::read(dir.file("applied/reduced.csv")).find("'=SUM(A1)") != std::string::npos);
}

TEST_CASE("hostile: a loadings file edited after the plan was written is refused", "[hostile]") {
  TempDir dir;
  std::string csv = "sample,a,b,c,g\n";
  for (int i = 0; i < 8; ++i)
    csv += 's' + std::to_string(i) + ',' + std::to_string(i) + ',' + std::to_string((i * 7) % 5) + ',' +
           std::to_string((i * 3) % 4) + (i % 2 ? ",x\n" : ",y\n");
  const std::string data = dir.write("d.csv", csv);
  REQUIRE(run({"reduce", data, "--label", "g", "--components", "2", "--out", dir.file("fit"), "--quiet"}).code == 0);
  // Change one digit of one loading: still a well-formed file, but not the one the plan names.
  std::string loadings = TempDir::read(dir.file("fit/loadings.tsv"));
  const std::size_t digit = loadings.find_first_of("123456789", loadings.find('\n') + 1);
  loadings[digit] = loadings[digit] == '9' ? '8' : static_cast<char>(loadings[digit] + 1);
  dir.write("fit/loadings.tsv", loadings);
  const auto r = run({"apply", dir.file("fit/plan.json"), data, "--out", dir.file("o")});
  require_one_error(r, 3);
  REQUIRE(r.err.find("loadings.tsv") != std::string::npos);
  REQUIRE(r.err.find("does not match the plan") != std::string::npos);
  REQUIRE(!std::filesystem::exists(dir.file("o")));
}

TEST_CASE("determinism: every command writes the same bytes with 1, 2 and 4 threads and any --memory",
          "[hostile]") {
  TempDir dir;
  // 90 samples x 400 features, labelled, with gaps and correlated pairs.
  std::string csv = "sample";
  for (int j = 0; j < 400; ++j) csv += ",f" + std::to_string(j);
  csv += ",group\n";
  std::uint64_t x = 99;
  auto next = [&] {
    x ^= x << 13, x ^= x >> 7, x ^= x << 17;
    return static_cast<double>(x % 100000) / 1000.0;
  };
  for (int i = 0; i < 90; ++i) {
    csv += 's';
    csv += std::to_string(i);
    double previous = 0;
    for (int j = 0; j < 400; ++j) {
      double v = next() + (i % 3 == 0 && j < 30 ? 20 : 0);
      if (j % 5 == 1) v = previous + next() / 50;
      previous = v;
      csv += ',';
      csv += x % 37 == 0 ? std::string("NA") : std::to_string(v);
    }
    csv += i % 3 == 0 ? ",case\n" : ",control\n";
  }
  const std::string data = dir.write("d.csv", csv);
  REQUIRE(run({"reduce", data, "--label", "group", "--keep", "20", "--components", "3", "--out", dir.file("fit"),
               "--quiet"})
              .code == 0);
  const std::vector<std::vector<std::string>> commands = {
      {"scan", data, "--label", "group"},
      {"rank", data, "--label", "group", "--rank-by", "f"},
      {"rank", data, "--label", "group", "--mi-estimator", "knn"},
      {"reduce", data, "--label", "group", "--keep", "25", "--components", "4"},
      {"reduce", data, "--label", "group", "--max-corr", "0.5", "--log2", "--scale", "--keep", "60", "--components", "2"},
      {"project", data, "--label", "group", "--components", "5"},
      {"apply", dir.file("fit/plan.json"), data},
  };
  // The run record (timings, command line) is the only thing allowed to differ.
  auto comparable = [](const std::filesystem::path& file) {
    const std::string text = TempDir::read(file.string());
    if (file.filename() == "plan.json") {
      auto plan = nlohmann::json::parse(text);
      plan.erase("command_line");
      for (auto& step : plan["steps"]) step.erase("seconds");
      return plan.dump();
    }
    return text;
  };
  int tag = 0;
  for (const auto& command : commands) {
    INFO(command[0] << " " << command.back());
    std::vector<std::string> folders;
    for (const auto& [threads, memory] : {std::pair{"1", ""}, {"2", ""}, {"4", ""}, {"2", "48K"}, {"4", "100K"}}) {
      auto args = command;
      const std::string out = dir.file("run" + std::to_string(tag++));
      args.insert(args.end(), {"--threads", threads, "--out", out, "--quiet"});
      if (*memory) args.insert(args.end(), {"--memory", memory, "--cache-dir", dir.path()});
      const auto r = run(args);
      INFO("--threads " << threads << " --memory " << memory << ": " << r.err);
      REQUIRE(r.code == 0);
      folders.push_back(out);
    }
    for (const auto& entry : std::filesystem::directory_iterator(folders[0])) {
      if (entry.path().filename() == "report.html") continue;  // shows the timings
      const std::string first = comparable(entry.path());
      for (std::size_t k = 1; k < folders.size(); ++k) {
        INFO(entry.path().filename().string() << " vs run " << k);
        REQUIRE(comparable(folders[k] + "/" + entry.path().filename().string()) == first);
      }
    }
  }
}
