// libFuzzer target: the delimited reader (plain text and gzip, both layouts, with and without a
// label column, text columns and a memory budget). Any input must end in a table or a pare::Error, never a
// crash, a hang or a sanitizer report.
#include <cstddef>  // std::size_t
#include <cstdint>  // std::uint8_t

#include "fuzz_support.h"
#include "pare/error.h"
#include "pare/io.h"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  if (size == 0) return 0;
  // The first byte picks the options, the rest is the file.
  const std::uint8_t flags = data[0];
  const pare::fuzz::MemoryFile file(data + 1, size - 1);
  if (!file.ok()) return 0;
  pare::ReadOptions options;
  options.layout = flags & 1 ? pare::Layout::kRowsAreFeatures : pare::Layout::kRowsAreSamples;
  if (flags & 2) options.label_column = "label";
  if (flags & 4) options.allow_inf = true;
  if (flags & 8) {
    options.memory.bytes = 4096;  // everything on disk
    options.memory.cache_dir = "/tmp";
  }
  if (flags & 16) options.delimiter = '\t';
  options.threads = flags & 32 ? 2 : 1;
  if (flags & 64) {  // text columns: annotation per feature, or per sample
    if (flags & 1) options.feature_info = {"symbol", "chrom"};
    else options.sample_info = {"batch"};
  }
  try {
    const pare::FeatureTable t = pare::read_table(file.path(), options);
    if (t.feature_names.size() != static_cast<std::size_t>(t.n_features()) ||
        t.sample_ids.size() != static_cast<std::size_t>(t.n_samples()))
      __builtin_trap();  // the table must be consistent
    for (const auto& column : t.feature_info)
      if (column.size() != t.feature_names.size()) __builtin_trap();
    for (const auto& column : t.sample_info)
      if (column.size() != t.sample_ids.size()) __builtin_trap();
    if (!t.labels.empty() && t.labels.size() != t.sample_ids.size()) __builtin_trap();
  } catch (const pare::Error&) {
  }
  return 0;
}
