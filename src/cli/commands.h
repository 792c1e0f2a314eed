// The command-line front end: dispatches a command and turns errors into messages and exit codes.
#pragma once

#include <ostream>  // std::ostream
#include <string>   // std::string
#include <vector>   // std::vector

namespace pare::cli {

/// Runs `pare ARGS...` (args excludes the program name), printing to `out` and `err`. Returns the
/// exit code: 0 done, 2 bad command line, 3 bad input data, 4 cannot write output, 1 other.
int run(const std::vector<std::string>& args, std::ostream& out, std::ostream& err);

}  // namespace pare::cli
