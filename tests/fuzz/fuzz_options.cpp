// libFuzzer target: the command line. The input is split at line breaks into words; the first
// byte picks the command. Words naming a path outside the scratch folder are dropped, so the
// commands read and write only there (a small data set and sample sheet live in it).
#include <unistd.h>

#include <cstddef>      // std::size_t
#include <cstdint>      // std::uint8_t
#include <cstdlib>      // std::abort
#include <fstream>      // std::ofstream
#include <sstream>      // std::ostringstream
#include <string>       // std::string
#include <string_view>  // std::string_view
#include <vector>       // std::vector

#include "cli/commands.h"

namespace {

void prepare_scratch_folder() {
  static const bool done = [] {
    std::string pattern = "/tmp/pare-fuzz-options-XXXXXX";
    if (!::mkdtemp(pattern.data()) || ::chdir(pattern.c_str()) != 0) std::abort();
    std::ofstream("d.csv") << "sample,a,b,c,label\ns1,1,2,3,x\ns2,2,1,0,y\ns3,3,5,1,x\ns4,4,4,2,y\n";
    std::ofstream("f.csv") << "feature,s1,s2,s3,s4\nlabel,x,y,x,y\na,1,2,3,4\nb,2,1,5,4\nc,3,0,1,2\n";
    std::ofstream("s.csv") << "sample,group\ns1,x\ns2,y\ns3,x\ns4,y\n";
    return true;
  }();
  (void)done;
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  if (size == 0) return 0;
  prepare_scratch_folder();
  static const char* const kCommands[] = {"scan", "rank", "reduce", "project", "apply", "help", "--version", ""};
  std::vector<std::string> args{kCommands[data[0] % 8]};
  std::string word;
  for (std::size_t i = 1; i <= size; ++i) {
    if (i == size || data[i] == '\n') {
      // No paths out of the scratch folder, nothing that would write a whole demo.
      if (word.find('/') == std::string::npos && word.find("demo") == std::string::npos) args.push_back(word);
      word.clear();
    } else {
      word += static_cast<char>(data[i]);
    }
  }
  std::ostringstream out, err;
  const int code = pare::cli::run(args, out, err);
  if (code < 0 || code > 4) __builtin_trap();  // exit codes are those of SPEC §6
  // A failed run ends with exactly one error line; warnings ("pare: warning: ...") may precede it.
  if (code != 0) {
    const std::string text = err.str();
    const std::size_t last = text.rfind('\n', text.size() >= 2 ? text.size() - 2 : 0);
    const std::string_view final_line = std::string_view(text).substr(last == std::string::npos ? 0 : last + 1);
    if (text.empty() || text.back() != '\n' || !final_line.starts_with("pare: error: ")) __builtin_trap();
    for (std::size_t at = 0; at < text.size();) {
      const std::size_t end = text.find('\n', at);
      const std::string_view line = std::string_view(text).substr(at, end - at);
      if (at != (last == std::string::npos ? 0 : last + 1) && !line.starts_with("pare: warning: ")) __builtin_trap();
      at = end + 1;
    }
  }
  return 0;
}
