// Runs the command line in process and keeps what it printed.
#pragma once

#include <sstream>  // std::ostringstream
#include <string>   // std::string
#include <vector>   // std::vector

#include "cli/commands.h"

namespace pare::test {

/// The exit code and the text of one `pare` run.
struct Run {
  int code = -1;
  std::string out;
  std::string err;
};

/// `pare ARGS...` through pare::cli::run.
inline Run run(const std::vector<std::string>& args) {
  std::ostringstream out, err;
  Run r;
  r.code = pare::cli::run(args, out, err);
  r.out = out.str();
  r.err = err.str();
  return r;
}

}  // namespace pare::test
