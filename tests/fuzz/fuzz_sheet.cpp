// libFuzzer target: the sample sheet reader, with and without a named label column.
#include <cstddef>  // std::size_t
#include <cstdint>  // std::uint8_t
#include <string>   // std::string
#include <vector>   // std::vector

#include "fuzz_support.h"
#include "pare/error.h"
#include "pare/io.h"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  if (size == 0) return 0;
  const std::uint8_t flags = data[0];
  const pare::fuzz::MemoryFile file(data + 1, size - 1);
  if (!file.ok()) return 0;
  try {
    const pare::SampleSheet sheet = pare::read_sample_sheet(file.path() + (flags & 1 ? ":group" : ""));
    if (sheet.ids.size() != sheet.labels.size() || sheet.cells.size() != sheet.ids.size()) __builtin_trap();
    for (const auto& row : sheet.cells)
      if (row.size() != sheet.header.size()) __builtin_trap();
    // Every column's values for the sheet's own ids and one it lacks.
    std::vector<std::string> ids = sheet.ids;
    ids.push_back("not-in-the-sheet");
    for (const auto& column : sheet.header)
      if (pare::sheet_column_values(sheet, column, ids).size() != ids.size()) __builtin_trap();
  } catch (const pare::Error&) {
  }
  return 0;
}
