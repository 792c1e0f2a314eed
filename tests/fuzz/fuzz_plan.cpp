// libFuzzer target: the plan loader. The input is plan.json, optionally followed by a line
// "--loadings--" and the loadings.tsv it names, both written into a scratch folder.
#include <unistd.h>

#include <cstddef>      // std::size_t
#include <cstdint>      // std::uint8_t
#include <cstdlib>      // std::abort
#include <fstream>      // std::ofstream
#include <string>       // std::string
#include <string_view>  // std::string_view

#include "pare/error.h"
#include "pare/plan.h"

namespace {

std::string scratch_folder() {
  static const std::string folder = [] {
    std::string pattern = "/tmp/pare-fuzz-plan-XXXXXX";
    if (!::mkdtemp(pattern.data())) std::abort();
    return pattern;
  }();
  return folder;
}

void write(const std::string& path, std::string_view bytes) {
  std::ofstream f(path, std::ios::binary | std::ios::trunc);
  f.write(bytes.data(), static_cast<std::streamsize>(bytes.size()));
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string_view input(reinterpret_cast<const char*>(data), size);
  const std::string folder = scratch_folder();
  constexpr std::string_view kSplit = "\n--loadings--\n";
  const std::size_t at = input.find(kSplit);
  write(folder + "/plan.json", input.substr(0, at));
  if (at != std::string_view::npos)
    write(folder + "/loadings.tsv", input.substr(at + kSplit.size()));
  else
    ::unlink((folder + "/loadings.tsv").c_str());
  try {
    const pare::Plan plan = pare::load_plan(folder + "/plan.json");
    (void)plan;
  } catch (const pare::Error&) {
  }
  return 0;
}
