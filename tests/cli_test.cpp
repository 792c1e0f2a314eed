// The command line, in process through pare::cli::run: exit codes and the one-line error message
// `pare: error: FILE:LINE:COLUMN: what (hint)` of SPEC §6, and a successful scan.
#include <filesystem>  // std::filesystem::exists
#include <regex>       // std::regex
#include <sstream>     // std::ostringstream
#include <string>      // std::string
#include <vector>      // std::vector

#include <catch2/catch.hpp>

#include "pare/io.h"

#include "cli/commands.h"
#include "support/cli_run.h"
#include "support/temp_dir.h"

namespace {

using pare::test::TempDir;

using pare::test::Run;
using pare::test::run;

// Columns of `pare: error: FILE[:LINE[:COLUMN]]: what`; 0 for a part that is absent.
struct Message {
  std::string file;
  long line = 0;
  long column = 0;
  std::string what;
};

// Checks the run failed with `code` and printed exactly one error line on stderr and nothing on
// stdout; returns the line's parts. Paths in the tests hold no ':', so the first ': ' after the
// location ends it.
Message error_line(const Run& r, int code) {
  INFO("exit " << r.code << ", stderr: " << r.err << "stdout: " << r.out);
  REQUIRE(r.code == code);
  REQUIRE(r.out.empty());
  REQUIRE(!r.err.empty());
  REQUIRE(r.err.find('\n') == r.err.size() - 1);  // one line, ended by its line break
  static const std::regex with_place(R"(^pare: error: ([^:\n]+)(?::(\d+))?(?::(\d+))?: (.+)\n$)");
  std::smatch m;
  REQUIRE(std::regex_match(r.err, m, with_place));
  Message msg;
  msg.file = m[1];
  msg.line = m[2].matched ? std::stol(m[2]) : 0;
  msg.column = m[3].matched ? std::stol(m[3]) : 0;
  msg.what = m[4];
  return msg;
}

// An input error (exit 3) at FILE:LINE:COLUMN (0 = that part must be absent) whose text contains
// `what`.
void require_input_error(const Run& r, const std::string& file, long line, long column,
                         const std::string& what) {
  const Message m = error_line(r, 3);
  INFO(r.err);
  REQUIRE(m.file == file);
  REQUIRE(m.line == line);
  REQUIRE(m.column == column);
  REQUIRE(m.what.find(what) != std::string::npos);
}

// A usage error (exit 2): no location, text contains `what`.
void require_usage_error(const Run& r, const std::string& what) {
  INFO("exit " << r.code << ", stderr: " << r.err);
  REQUIRE(r.code == 2);
  REQUIRE(r.out.empty());
  static const std::regex usage(R"(^pare: error: ([^\n]+)\n$)");
  REQUIRE(std::regex_match(r.err, usage));
  REQUIRE(r.err.find(what) != std::string::npos);
}

}  // namespace

TEST_CASE("cli: a missing input file", "[cli]") {
  TempDir dir;
  const std::string path = dir.file("nope.csv");
  require_input_error(run({"scan", path, "--out", dir.path()}), path, 0, 0, "cannot open the file");
}

TEST_CASE("cli: an empty file and a header-only file", "[cli]") {
  TempDir dir;
  const auto empty = dir.write("empty.csv", "");
  require_input_error(run({"scan", empty, "--out", dir.path()}), empty, 1, 1, "the file is empty");
  const auto header = dir.write("header.csv", "id,a,b\n");
  require_input_error(run({"scan", header, "--out", dir.path()}), header, 2, 1,
                      "no data lines after the header");
  const auto header_f = dir.write("header-f.csv", "feature,s1,s2");  // no final line break
  require_input_error(run({"scan", header_f, "--layout", "rows=features", "--out", dir.path()}),
                      header_f, 2, 1, "no data lines after the header");
  REQUIRE(!std::filesystem::exists(dir.file("profile.tsv")));
}

TEST_CASE("cli: ragged rows, too few and too many fields", "[cli]") {
  TempDir dir;
  // Too few: the column just past the end of the short line ("s2,3" is 4 bytes).
  const auto few = dir.write("few.csv", "id,a,b\ns1,1,2\ns2,3\n");
  require_input_error(run({"scan", few, "--out", dir.path()}), few, 3, 5,
                      "line has 2 fields, the header has 3");
  // Too many: the delimiter that starts the extra field ("s1,1,2" is 6 bytes).
  const auto many = dir.write("many.csv", "id,a,b\ns1,1,2,9\n");
  require_input_error(run({"scan", many, "--out", dir.path()}), many, 2, 7,
                      "line has more fields than the header's 3");
  const auto few_f = dir.write("few-f.csv", "feature,s1,s2\ng1,1,2\ng2,1\n");
  require_input_error(run({"scan", few_f, "--layout", "rows=features", "--out", dir.path()}), few_f,
                      3, 5, "line has 2 fields, the header has 3");
  const auto many_f = dir.write("many-f.csv", "feature,s1,s2\ng1,1,2,3\n");
  require_input_error(run({"scan", many_f, "--layout", "rows=features", "--out", dir.path()}),
                      many_f, 2, 7, "line has more fields than the header's 3");
}

TEST_CASE("cli: a non-numeric cell", "[cli]") {
  TempDir dir;
  const auto path = dir.write("text.csv", "id,a,b\ns1,1,2\ns2,3,abc\n");
  // Text in a rows=samples column: the message says how to use such a column.
  require_input_error(run({"scan", path, "--out", dir.path()}), path, 3, 6,
                      "column \"b\" holds text (\"abc\" on line 3), not numbers (pass --label b if it holds "
                      "the classes, or --sample-info b");
  const auto odd = dir.write("odd.csv", "id,a,b\ns1,1,2\ns2,3,1.2.3\n");
  require_input_error(run({"scan", odd, "--out", dir.path()}), odd, 3, 6,
                      "cannot read \"1.2.3\" in column \"b\" as a number");
  const auto path_f = dir.write("text-f.csv", "feature,s1,s2\ng1,1,2\ng2,abc,3\n");
  require_input_error(run({"scan", path_f, "--layout", "rows=features", "--out", dir.path()}),
                      path_f, 3, 4, "cannot read \"abc\" in column \"g2\" as a number");
  // "+-1" is not a number either.
  const auto signs = dir.write("signs.csv", "id,a\ns1,+-1\n");
  require_input_error(run({"scan", signs, "--out", dir.path()}), signs, 2, 4,
                      "cannot read \"+-1\"");
}

TEST_CASE("cli: inf is an input error unless --allow-inf", "[cli]") {
  TempDir dir;
  const auto path = dir.write("inf.csv", "id,a,b\ns1,inf,2\ns2,1,2\n");
  const Run bad = run({"scan", path, "--out", dir.path()});
  require_input_error(bad, path, 2, 4, "infinite value \"inf\" in column \"a\"");
  REQUIRE(bad.err.find("--allow-inf") != std::string::npos);

  const Run good = run({"scan", path, "--allow-inf", "--out", dir.path()});
  INFO(good.err);
  REQUIRE(good.code == 0);
  REQUIRE(good.err.empty());
  REQUIRE(std::filesystem::exists(dir.file("profile.tsv")));
}

TEST_CASE("cli: duplicate sample ids in both layouts", "[cli]") {
  TempDir dir;
  const auto samples = dir.write("dup.csv", "id,a\ns1,1\ns2,2\ns1,3\n");
  require_input_error(run({"scan", samples, "--out", dir.path()}), samples, 4, 1,
                      "duplicate sample id \"s1\" (first seen on line 2)");
  // rows=features: the ids are header fields; "feature," is 8 bytes, so s1 starts at column 9,
  // s2 at 12 and the second s1 at 15.
  const auto features = dir.write("dup-f.csv", "feature,s1,s2,s1\ng1,1,2,3\n");
  require_input_error(run({"scan", features, "--layout", "rows=features", "--out", dir.path()}),
                      features, 1, 15, "duplicate sample id \"s1\" (first seen in column 9)");
  // Quoted ids: columns count the bytes as written, quotes included.
  const auto quoted = dir.write("dup-q.csv", "feature,\"s,1\",s2,\"s,1\"\ng1,1,2,3\n");
  require_input_error(run({"scan", quoted, "--layout", "rows=features", "--out", dir.path()}),
                      quoted, 1, 18, "duplicate sample id \"s,1\" (first seen in column 9)");
}

TEST_CASE("cli: an unknown --label column or line", "[cli]") {
  TempDir dir;
  const auto samples = dir.write("d.csv", "id,a,group\ns1,1,A\n");
  // The header is where the column would be: line 1, no column.
  require_input_error(run({"scan", samples, "--label", "condition", "--out", dir.path()}), samples,
                      1, 0, "no column named \"condition\" for --label");
  const auto features = dir.write("f.csv", "feature,s1,s2\ng1,1,2\n");
  require_input_error(run({"scan", features, "--layout", "rows=features", "--label", "condition",
                           "--out", dir.path()}),
                      features, 0, 0, "no line starts with \"condition\" for --label");
}

TEST_CASE("cli: a sample without a label is left out of supervised steps", "[cli]") {
  TempDir dir;
  // rows=samples, rows=features and a sheet: an empty or NA label is no longer an error. scan
  // profiles every sample and counts those without a label; rank leaves them out and says so.
  const auto samples = dir.write("d.csv", "id,a,group\ns1,1,A\ns2,3,\ns3,2,B\ns4,5,A\ns5,4,B\n");
  const Run scan = run({"scan", samples, "--label", "group", "--out", dir.file("s")});
  INFO(scan.err);
  REQUIRE(scan.code == 0);
  REQUIRE(scan.out.find("A 2, B 2 (majority:minority 1.0:1); 1 without a label") != std::string::npos);
  const Run rank = run({"rank", samples, "--label", "group", "--out", dir.file("r")});
  INFO(rank.err);
  REQUIRE(rank.code == 0);
  REQUIRE(rank.err.find("pare: warning: 1 sample without a label left out (s2;") != std::string::npos);
  REQUIRE(rank.out.find("4 of 5 used") != std::string::npos);
  const auto features = dir.write("f.csv", "feature,s1,s2,s3\ngroup,\"a,b\",NA,c\ng1,1,2,4\n");
  const Run f = run({"scan", features, "--layout", "rows=features", "--label", "group", "--out", dir.file("f")});
  REQUIRE(f.code == 0);
  REQUIRE(f.out.find("1 without a label") != std::string::npos);
  // Every label missing: nothing to score against.
  const auto data = dir.write("d2.csv", "id,a\ns1,1\ns2,2\n");
  const auto sheet = dir.write("sheet.csv", "sample,group\ns1,NA\ns2,\n");
  require_input_error(run({"rank", data, "--labels", sheet, "--out", dir.path(), "--quiet"}), sheet, 0, 0,
                      "no sample is left with a label");
}

TEST_CASE("cli: a sample sheet that matches no samples or only some", "[cli]") {
  TempDir dir;
  const auto data = dir.write("d.csv", "id,a\ns1,1\ns2,2\ns3,3\n");
  const auto none = dir.write("none.csv", "sample,group\nx1,A\nx2,B\n");
  require_input_error(run({"scan", data, "--labels", none, "--out", dir.path()}), none, 0, 0,
                      "no sample id in the sample sheet matches a sample of " + data);
  const auto some = dir.write("some.csv", "sample,group\ns3,A\ns1,B\n");
  require_input_error(run({"scan", data, "--labels", some + ":group", "--out", dir.path()}), some,
                      0, 0, "1 of 3 samples of " + data + " are not in the sample sheet: \"s2\"");
}

TEST_CASE("cli: a truncated gzip file", "[cli]") {
  TempDir dir;
  std::string text = "id,a,b\n";
  for (int i = 0; i < 200; ++i) {
    text += 's';
    text += std::to_string(i);
    text += ',';
    text += std::to_string(i * 3);
    text += ',';
    text += std::to_string(i % 7);
    text += '\n';
  }
  const std::string whole = dir.file("whole.csv.gz");
  {
    pare::OutputFile f(whole);
    f.write_gzip(text);
    f.commit();
  }
  // The whole file reads fine; its first half does not.
  const Run ok = run({"scan", whole, "--out", dir.path()});
  INFO(ok.err);
  REQUIRE(ok.code == 0);
  const std::string bytes = TempDir::read(whole);
  const auto half = dir.write("half.csv.gz", bytes.substr(0, bytes.size() / 2));
  require_input_error(run({"scan", half, "--out", dir.path()}), half, 0, 0, "gzip data ends early");
}

TEST_CASE("cli: usage errors exit 2", "[cli]") {
  TempDir dir;
  const auto data = dir.write("d.csv", "id,a\ns1,1\n");
  const auto sheet = dir.write("sheet.csv", "sample,group\ns1,A\n");
  require_usage_error(run({"scan", data, "--bogus"}), "--bogus");
  require_usage_error(run({"frobnicate"}), "unknown command 'frobnicate'");
  require_usage_error(run({"scan", data, "--layout", "columns"}),
                      "--layout columns is not rows=samples or rows=features");
  require_usage_error(run({"scan", data, "--delimiter", "pipe"}),
                      "--delimiter pipe is not one of comma, tab, semicolon");
  require_usage_error(run({"scan", data, "--label", "group", "--labels", sheet}),
                      "give one of --label, --labels, --target and --targets");
  // No command at all: the usage text on stderr, exit 2.
  const Run nothing = run({});
  REQUIRE(nothing.code == 2);
  REQUIRE(nothing.out.empty());
  REQUIRE(nothing.err.find("usage: pare COMMAND") != std::string::npos);
  REQUIRE(!std::filesystem::exists(dir.file("profile.tsv")));
}

TEST_CASE("cli: an output folder that cannot be created exits 4", "[cli]") {
  TempDir dir;
  const auto data = dir.write("d.csv", "id,a\ns1,1\n");
  const auto blocker = dir.write("plain-file", "not a folder\n");
  const std::string out = blocker + "/sub";
  const Message m = error_line(run({"scan", data, "--out", out}), 4);
  REQUIRE(m.file == out);
  REQUIRE(m.line == 0);
  REQUIRE(m.what.find("cannot create the output folder") != std::string::npos);
}

TEST_CASE("cli: --na replaces the missing-value tokens, an empty list included", "[cli]") {
  TempDir dir;
  const auto path = dir.write("na.csv", "id,a,b\ns1,,-999\ns2,3,NA\n");
  // With --na "" only an empty field is missing: NA (line 3, column 6) is an error.
  require_input_error(run({"scan", path, "--na", "", "--out", dir.path()}), path, 3, 6,
                      "cannot read \"NA\"");
  // With --na NA,,-999 the numeric token -999 is missing too: b has 2 missing of 2.
  const Run r = run({"scan", path, "--na", "NA,,-999", "--out", dir.path()});
  INFO(r.err);
  REQUIRE(r.code == 0);
  const std::string tsv = TempDir::read(dir.file("profile.tsv"));
  REQUIRE(tsv.find("\nb\t2\t0\t2\t1\tNA\t") != std::string::npos);
}

TEST_CASE("cli: scan writes profile.tsv and prints the summary", "[cli]") {
  TempDir dir;
  // 3 samples x 2 features, 1 of 6 cells missing (16.7%), classes dry 2 and wet 1 (2.0:1).
  const auto data = dir.write("d.csv",
                              "id,g1,g2,group\n"
                              "s1,1,2,dry\n"
                              "s2,NA,4,dry\n"
                              "s3,5,6,wet\n");
  const std::string out_dir = dir.file("out/nested");  // created on demand
  const Run r = run({"scan", data, "--label", "group", "--out", out_dir, "--threads", "1"});
  INFO("stderr: " << r.err << "stdout: " << r.out);
  REQUIRE(r.code == 0);
  REQUIRE(r.err.empty());
  const std::string profile = out_dir + "/profile.tsv";
  REQUIRE(std::filesystem::exists(profile));
  const std::string tsv = TempDir::read(profile);
  REQUIRE(tsv.rfind("feature\tindex\t", 0) == 0);
  // g1 = 1, NA, 5: n 2, missing 1, rate 1/3 (shortest round-trip text of the double, as Python's
  // repr(1/3) prints it), mean 3, variance (4 + 4) / 1 = 8.
  REQUIRE(tsv.find("\ng1\t1\t2\t1\t0.3333333333333333\t3\t8\t") != std::string::npos);
  REQUIRE(tsv.find("\ng2\t2\t3\t0\t0\t4\t4\t2\t2\t6\t\n") != std::string::npos);

  REQUIRE(r.out.rfind("pare scan: " + data + "\n", 0) == 0);
  REQUIRE(r.out.find("3 samples x 2 features (rows=samples, comma-delimited") != std::string::npos);
  REQUIRE(r.out.find("missing    16.7% of cells (1); 1 samples above 20.0% missing: s2\n") !=
          std::string::npos);
  REQUIRE(r.out.find("classes    group: dry 2, wet 1 (majority:minority 2.0:1)") !=
          std::string::npos);
  REQUIRE(r.out.find("wrote      " + profile + "\n") != std::string::npos);

  // The same data as rows=features with a sample sheet; --quiet prints nothing.
  const auto features = dir.write("f.tsv", "feature\ts1\ts2\ts3\ng1\t1\tNA\t5\ng2\t2\t4\t6\n");
  const auto sheet = dir.write("sheet.csv", "sample,condition\ns3,wet\ns2,dry\ns1,dry\n");
  const Run f = run({"scan", features, "--layout", "rows=features", "--labels",
                     sheet + ":condition", "--out", dir.path()});
  INFO("stderr: " << f.err);
  REQUIRE(f.code == 0);
  REQUIRE(f.out.find("(rows=features, tab-delimited") != std::string::npos);
  REQUIRE(f.out.find("classes    condition: dry 2, wet 1 (majority:minority 2.0:1)") !=
          std::string::npos);
  REQUIRE(TempDir::read(dir.file("profile.tsv")) == tsv);

  const Run quiet = run({"scan", data, "--label", "group", "--quiet", "--out", dir.path()});
  REQUIRE(quiet.code == 0);
  REQUIRE(quiet.out.empty());
}

TEST_CASE("cli: --help exits 0, --version prints the version", "[cli]") {
  const Run help = run({"--help"});
  REQUIRE(help.code == 0);
  REQUIRE(help.err.empty());
  REQUIRE(help.out.find("usage: pare COMMAND") != std::string::npos);
  const Run scan_help = run({"scan", "--help"});
  REQUIRE(scan_help.code == 0);
  REQUIRE(scan_help.out.find("--layout") != std::string::npos);
  REQUIRE(scan_help.out.find("--allow-inf") != std::string::npos);

  const Run version = run({"--version"});
  REQUIRE(version.code == 0);
  REQUIRE(version.out == std::string("pare ") + PARE_VERSION + "\n");
  REQUIRE(std::regex_match(version.out, std::regex(R"(^pare \d+\.\d+\.\d+\n$)")));
}
