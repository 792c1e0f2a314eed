#include <unistd.h>

#include <algorithm>  // std::find
#include <cstdlib>    // std::getenv
#include <fstream>    // std::ifstream
#include <iostream>   // std::cout, std::cerr
#include <iterator>   // std::istreambuf_iterator
#include <memory>     // std::unique_ptr
#include <string>
#include <string_view>

#include "cli/commands.h"
#include "cli/progress.h"

namespace {

// glibc's allocator backs its large blocks with 4 KiB pages unless it is told at start-up
// (GLIBC_TUNABLES=glibc.malloc.hugetlb=1, glibc 2.35 and later) to ask for transparent huge pages.
// On virtual machines every first touch of a fresh page traps to the hypervisor, and pare
// allocates and fills hundreds of megabytes of scratch (text buffers, Krylov blocks, pair-screen
// codes): with the setting a large run takes half the page faults (performance.md). The setting can only be read at
// start-up, so a process started without it starts itself again with it, once; a GLIBC_TUNABLES
// that already names glibc.malloc.hugetlb (=0 turns it off) is left alone, as are sanitizer
// builds and runs under valgrind (which would lose the process at the exec). So is a run with a
// --memory budget: huge pages make it no faster and hold up to 2 MiB of a block resident where 4
// KiB pages hold only what is touched.
// If the exec fails, the process goes on as it is.
void restart_with_huge_pages(int argc, char** argv) {
#if defined(__GLIBC__) && !defined(__SANITIZE_ADDRESS__) && !defined(__SANITIZE_THREAD__)
#if defined(__has_feature)
#if __has_feature(address_sanitizer) || __has_feature(thread_sanitizer) || __has_feature(memory_sanitizer)
  return;
#endif
#endif
  for (int i = 1; i < argc; ++i)
    if (std::string_view(argv[i]).starts_with("--memory")) return;
  // The environment as the process was started with it: glibc cuts its own copy of
  // GLIBC_TUNABLES at each ':' as it reads it, so getenv alone could miss the setting after the
  // restart. Without /proc there is no /proc/self/exe to restart from either.
  std::ifstream started("/proc/self/environ", std::ios::binary);
  if (!started) return;
  const std::string environment((std::istreambuf_iterator<char>(started)), std::istreambuf_iterator<char>());
  if (environment.find("glibc.malloc.hugetlb") != std::string::npos) return;
  const char* current = std::getenv("GLIBC_TUNABLES");
  const std::string before = current != nullptr ? current : "";
  if (const char* preload = std::getenv("LD_PRELOAD"); preload != nullptr && std::string(preload).find("vgpreload") != std::string::npos)
    return;
  const std::string tunables = before.empty() ? "glibc.malloc.hugetlb=1" : before + ":glibc.malloc.hugetlb=1";
  if (::setenv("GLIBC_TUNABLES", tunables.c_str(), 1) != 0) return;
  ::execv("/proc/self/exe", argv);
  if (current != nullptr)
    ::setenv("GLIBC_TUNABLES", before.c_str(), 1);
  else
    ::unsetenv("GLIBC_TUNABLES");
#else
  (void)argc;
  (void)argv;
#endif
}

}  // namespace

int main(int argc, char** argv) {
  restart_with_huge_pages(argc, argv);
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
