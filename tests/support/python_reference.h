// Values computed at test time by Debian's /usr/bin/python3 and its standard library (hashlib,
// gzip, the strict UTF-8 codec), for unit tests that check pare's own code against them. A
// missing python3 skips the check outside CI and fails it under CI=true, as a missing dataset
// does (support/public_data.h).
#pragma once

#include <stdio.h>  // popen, pclose

#include <optional>  // std::optional
#include <string>    // std::string
#include <vector>    // std::vector

#include <catch2/catch.hpp>

#include "support/public_data.h"
#include "support/temp_dir.h"

namespace pare::test {

/// What `/usr/bin/python3 SCRIPT ARGS...` writes to stdout, the script written to a file in `dir`.
/// Arguments are paths of the test's own temporary files (no shell quoting is done). Returns
/// nothing when python3 cannot run here; then the caller skips its check.
inline std::optional<std::string> python_output(const TempDir& dir, const std::string& script,
                                                const std::vector<std::string>& args = {}) {
  std::string command = "/usr/bin/python3 " + dir.write("reference.py", script);
  for (const auto& a : args) command += " " + a;
  command += " 2>&1";
  FILE* pipe = ::popen(command.c_str(), "r");
  std::string out;
  int status = -1;
  if (pipe) {
    char buffer[4096];
    std::size_t got = 0;
    while ((got = std::fread(buffer, 1, sizeof buffer, pipe)) > 0) out.append(buffer, got);
    status = ::pclose(pipe);
  }
  if (status != 0) {
    INFO("/usr/bin/python3 did not run the reference script: " << out);
    REQUIRE_FALSE(in_ci());
    WARN("skipped: /usr/bin/python3 is missing or failed (install python3)");
    return std::nullopt;
  }
  return out;
}

}  // namespace pare::test
