// Progress of long steps (include/pare/progress.h): what a listener is told, and that the
// library's own steps report through it. The counts are those of the test's own input.
#include "pare/progress.h"

#include <cstdint>      // std::int64_t
#include <stdexcept>    // std::runtime_error
#include <string>       // std::string
#include <string_view>  // std::string_view
#include <vector>       // std::vector

#include <catch2/catch.hpp>

#include "support/cli_run.h"
#include "support/temp_dir.h"

using pare::test::run;
using pare::test::TempDir;

namespace {

struct Recorder final : pare::ProgressListener {
  std::vector<std::string> events;
  std::int64_t total = 0, last = 0;
  void begin(std::string_view step, std::int64_t t, std::string_view unit) override {
    events.push_back("begin " + std::string(step) + " " + std::string(unit));
    total = t;
  }
  void update(std::int64_t done) override { last = done; }
  void end(std::int64_t done, double seconds) override {
    events.push_back("end " + std::to_string(done) + (seconds >= 0 ? "" : " negative"));
  }
  void abandon() override { events.push_back("abandon"); }
};

}  // namespace

TEST_CASE("progress: steps report begin, end and their units; an error abandons", "[progress]") {
  Recorder recorder;
  pare::set_progress_listener(&recorder);
  {
    pare::ProgressStep step("pruning", 100, "candidates");
    for (int i = 0; i < 100; ++i) step.add(1);
  }
  try {
    pare::ProgressStep step("reading", 10, "bytes");
    step.add(3);
    throw std::runtime_error("stop");
  } catch (const std::runtime_error&) {
  }
  // The library's own steps: a real read reports the bytes it parsed.
  TempDir dir;
  const std::string body = "id,a,b\ns1,1,2\ns2,3,4\n";
  REQUIRE(run({"scan", dir.write("d.csv", body), "--out", dir.file("o")}).code == 0);
  pare::set_progress_listener(nullptr);
  REQUIRE(recorder.events.size() >= 5);
  REQUIRE(recorder.events[0] == "begin pruning candidates");
  REQUIRE(recorder.events[1] == "end 100");
  REQUIRE(recorder.events[2] == "begin reading bytes");
  REQUIRE(recorder.events[3] == "abandon");
  REQUIRE(recorder.events[4] == "begin reading bytes");
  REQUIRE(recorder.events[5] ==
          "end " + std::to_string(body.size() - std::string("id,a,b\n").size()));
}
