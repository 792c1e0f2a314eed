// Hostile and damaged input: every case ends in one clear error line with the right exit code,
// or in correct handling; never a crash, a hang or a half-written output. Cases found by fuzzing
// (tests/fuzz) are kept here as regression tests.

#include <cstdint>     // std::uint64_t
#include <filesystem>  // std::filesystem::exists
#include <string>      // std::string
#include <vector>      // std::vector

#include <catch2/catch.hpp>

#include "internal/gzip.h"
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
