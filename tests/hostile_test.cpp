// Hostile and damaged input: every case ends in one clear error line with the right exit code,
// or in correct handling; never a crash, a hang or a half-written output. Cases found by fuzzing
// (tests/fuzz) are kept here as regression tests.

#include <string>  // std::string
#include <vector>  // std::vector

#include <catch2/catch.hpp>

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
