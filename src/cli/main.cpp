#include <iostream>  // std::cout, std::cerr

#include "cli/commands.h"

int main(int argc, char** argv) {
  std::ios::sync_with_stdio(false);
  const std::vector<std::string> args(argv + 1, argv + argc);
  const int code = pare::cli::run(args, std::cout, std::cerr);
  std::cout.flush();
  return code;
}
