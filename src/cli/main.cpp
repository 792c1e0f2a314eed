#include <unistd.h>

#include <algorithm>  // std::find
#include <iostream>   // std::cout, std::cerr
#include <memory>     // std::unique_ptr

#include "cli/commands.h"
#include "cli/progress.h"

int main(int argc, char** argv) {
  std::ios::sync_with_stdio(false);
  const std::vector<std::string> args(argv + 1, argv + argc);
  // Progress goes to stderr, so it never mixes with what the commands print on stdout.
  const bool quiet = std::find(args.begin(), args.end(), "--quiet") != args.end() ||
                     std::find(args.begin(), args.end(), "--help") != args.end();
  std::unique_ptr<pare::cli::ProgressPrinter> progress;
  if (!quiet) progress = std::make_unique<pare::cli::ProgressPrinter>(std::cerr, ::isatty(STDERR_FILENO) == 1);
  const int code = pare::cli::run(args, std::cout, std::cerr);
  std::cout.flush();
  return code;
}
