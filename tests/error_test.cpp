// Errors (include/pare/error.h): the message shape `FILE:LINE:COLUMN: what (what to do)`, the
// kinds and the exit codes the command line gives them. The codes and the shape are those of
// /work/shared/SPEC.md §6: 0 done, 2 bad command line, 3 bad input data, 4 cannot write output,
// 1 anything else.
#include "pare/error.h"

#include <string>  // std::string

#include <catch2/catch.hpp>

#include "support/cli_run.h"
#include "support/temp_dir.h"

namespace {

using pare::Error;
using pare::ErrorKind;
using pare::format_message;

// The Error `fn` throws.
template <typename Fn>
Error caught(Fn&& fn) {
  try {
    fn();
  } catch (const Error& e) {
    return e;
  }
  FAIL("no pare::Error was thrown");
  return Error(ErrorKind::kOther, "");
}

}  // namespace

TEST_CASE("error: each kind is the exit code SPEC §6 gives it", "[error]") {
  CHECK(static_cast<int>(ErrorKind::kOther) == 1);
  CHECK(static_cast<int>(ErrorKind::kUsage) == 2);
  CHECK(static_cast<int>(ErrorKind::kInput) == 3);
  CHECK(static_cast<int>(ErrorKind::kOutput) == 4);
}

TEST_CASE("error: FILE:LINE:COLUMN: what (hint), leaving out what is unknown", "[error]") {
  CHECK(format_message({"data.csv", 12, 7}, "cannot read \"x\"", "fix it") ==
        "data.csv:12:7: cannot read \"x\" (fix it)");
  CHECK(format_message({"data.csv", 12, 7}, "what") == "data.csv:12:7: what");
  CHECK(format_message({"data.csv", 12}, "what") == "data.csv:12: what");
  CHECK(format_message({"data.csv"}, "what", "hint") == "data.csv: what (hint)");
  CHECK(format_message({"data.csv", 0, 7}, "what") ==
        "data.csv: what");  // no column without a line
  CHECK(format_message({}, "what", "hint") == "what (hint)");
  CHECK(format_message({"", 3, 4}, "what") == "what");  // no line without a file
}

TEST_CASE("error: the throwing helpers give their kind and the formatted message", "[error]") {
  const Error input = caught([] {
    pare::throw_input_error({"in.tsv", 2, 5}, "bad cell", "give a number");
  });
  CHECK(input.kind() == ErrorKind::kInput);
  CHECK(std::string(input.what()) == "in.tsv:2:5: bad cell (give a number)");
  const Error usage =
      caught([] { pare::throw_usage_error("--keep must be positive", "e.g. --keep 100"); });
  CHECK(usage.kind() == ErrorKind::kUsage);
  CHECK(std::string(usage.what()) == "--keep must be positive (e.g. --keep 100)");
  const Error output = caught([] { pare::throw_output_error("out/plan.json", "cannot write"); });
  CHECK(output.kind() == ErrorKind::kOutput);
  CHECK(std::string(output.what()) == "out/plan.json: cannot write");
  // An Error is a std::runtime_error, so callers that know nothing of pare still see the message.
  const Error other(ErrorKind::kOther, "internal");
  CHECK(std::string(static_cast<const std::runtime_error&>(other).what()) == "internal");
}

TEST_CASE("error: a message is one printable line whatever bytes it quotes", "[error]") {
  const Error e(ErrorKind::kInput, "f.csv:1:1: name \"a\nb\tc\x01\xff\" (hint)");
  CHECK(std::string(e.what()) == "f.csv:1:1: name \"a\\nb\\tc\\x01\\xFF\" (hint)");
  const Error utf8(ErrorKind::kInput,
                   "sample \"gr\xC3\xB6\xC3\x9F"
                   "e\"");
  CHECK(std::string(utf8.what()) ==
        "sample \"gr\xC3\xB6\xC3\x9F"
        "e\"");  // valid UTF-8 is kept as it is
}

TEST_CASE("error: the command line prints one `pare: error:` line and exits with the kind",
          "[error]") {
  pare::test::TempDir dir;
  const auto one_error_line = [](const pare::test::Run& r, const std::string& expected) {
    INFO(r.err);
    CHECK(r.err.rfind("pare: error: " + expected, 0) == 0);
    CHECK(r.err.find('\n') == r.err.size() - 1);
  };
  const pare::test::Run usage = pare::test::run({"scan", "--no-such-option"});
  CHECK(usage.code == 2);
  one_error_line(usage, "");
  const std::string missing = dir.file("absent.csv");
  const pare::test::Run input = pare::test::run({"scan", missing, "--out", dir.file("o1")});
  CHECK(input.code == 3);
  one_error_line(input, missing + ": cannot open the file");
  // --out below a regular file: the folder cannot be made.
  const std::string data = dir.write("d.csv", "id,a,b\ns1,1,2\ns2,3,4\n");
  const std::string blocker = dir.write("blocker", "");
  const pare::test::Run output = pare::test::run({"scan", data, "--out", blocker + "/out"});
  CHECK(output.code == 4);
  one_error_line(output, "");
}
