// Reading delimited matrices (CSV/TSV, optionally gzip-compressed) and sample sheets, and writing
// outputs through temporary files that are renamed into place only when complete.
#pragma once

#include <cstdint>      // std::int64_t
#include <string>       // std::string
#include <string_view>  // std::string_view
#include <vector>       // std::vector

#include "pare/matrix.h"

namespace pare {

/// The tokens read as a missing value by default: empty, NA, NaN, nan, null, ?.
std::vector<std::string> default_na_tokens();

/// How to read a delimited matrix.
struct ReadOptions {
  Layout layout = Layout::kRowsAreSamples;
  char delimiter = 0;                                ///< 0: detect from the header line
  std::vector<std::string> na_tokens = default_na_tokens();
  bool allow_inf = false;                            ///< accept inf/-inf as values
  std::string label_column;                          ///< column (or row, rows=features) of labels
  bool label_is_target = false;                      ///< label_column holds a continuous target (messages say `target`)
  bool info_optional = false;                        ///< feature_info / sample_info names the file
                                                     ///< lacks are ignored (apply: the plan's columns)
  bool label_optional = false;                       ///< a label_column the file lacks means no labels
                                                     ///< (apply: new samples often come unlabelled)
  /// rows=features: header names of text columns describing each feature (symbol, chromosome):
  /// not samples; their text goes to FeatureTable::feature_info.
  std::vector<std::string> feature_info;
  /// rows=samples: header names of text columns describing each sample (batch, site): not
  /// features; their text goes to FeatureTable::sample_info.
  std::vector<std::string> sample_info;
  int threads = 0;                                   ///< 0: OpenMP's default
  MemoryBudget memory;                               ///< past it the matrix goes to a cache file
};

/// Reads a whole matrix. Throws Error(kInput) with file:line:column on malformed input, and
/// Error(kUsage) when `feature_info` / `sample_info` do not fit the layout, repeat a name or name
/// the label. A label that is a missing-value token is read as "" (no label). Duplicate feature
/// names are made unique (FeatureTable::renamed).
FeatureTable read_table(const std::string& path, const ReadOptions& options);

/// Sample id -> label, as read from a sample sheet, and every other column of it.
struct SampleSheet {
  std::string path;
  std::string column;                   ///< the label column used
  std::vector<std::string> ids;         ///< in file order
  std::vector<std::string> labels;      ///< one per id; "" where the sheet has a missing token
  std::vector<std::int64_t> lines;      ///< 1-based line of each id
  std::vector<std::string> header;      ///< the sheet's column names
  std::vector<std::vector<std::string>> cells;  ///< one row per id: its fields as written
};

/// A sample sheet named as `FILE[:COLUMN]`: a path that exists as written wins over splitting at
/// the last colon (so a file name may hold a colon).
struct SheetSpec {
  std::string path;
  std::string column;  ///< empty: the second column
};
SheetSpec parse_sheet_spec(const std::string& spec);

/// Reads `spec` = `FILE[:COLUMN]` (parse_sheet_spec): first column sample ids, COLUMN (default: the second column)
/// the labels. The delimiter is detected from the header line unless given.
SampleSheet read_sample_sheet(const std::string& spec, char delimiter = 0);

/// The values of the sheet's column `column` for `sample_ids`, one per id: "" for a missing-value
/// token (the default tokens) or an id not in the sheet. Throws Error(kInput) at {sheet.path, 1}
/// naming the sheet's columns when there is no such column, and at the line of a value that is
/// not UTF-8 text.
std::vector<std::string> sheet_column_values(const SampleSheet& sheet, const std::string& column,
                                             const std::vector<std::string>& sample_ids);

/// Sets `table.labels` from `sheet`, matched by sample id ("" where the sheet has no label). Every
/// sample of the table must appear in the sheet; sheet rows for other samples are ignored.
void attach_labels(FeatureTable& table, const SampleSheet& sheet);

/// Reads a file whole, inflating it when it starts with the gzip magic bytes.
std::string read_file_text(const std::string& path);

/// Detects the delimiter of a header line: tab, comma or semicolon, whichever occurs most outside
/// quotes (comma when none does).
char detect_delimiter(std::string_view header_line);

/// Splits one delimited line (no line break) into fields, undoing CSV quoting.
std::vector<std::string> split_fields(std::string_view line, char delimiter);

/// A file written under a temporary name in the same folder and renamed to its final name by
/// commit(). Destroyed without commit(), it removes the temporary file, so a failed run leaves no
/// half-written output under a final name.
class OutputFile {
 public:
  explicit OutputFile(std::string path);
  OutputFile(const OutputFile&) = delete;
  OutputFile& operator=(const OutputFile&) = delete;
  ~OutputFile();

  void write(std::string_view bytes);
  /// Writes `bytes` gzip-compressed (the whole content at once).
  void write_gzip(std::string_view bytes, int level = 6);
  /// For a large file written once: from here on, whole 4 MiB blocks go to the disk directly
  /// (O_DIRECT), not through the page cache, where the filesystem allows it (else nothing
  /// changes). Copying hundreds of megabytes into fresh page-cache pages costs more CPU than the
  /// formatting that produced them on a virtual machine; the tail is written normally at commit.
  /// On a slow device (under 250 MB/s) it goes back to the page cache.
  void write_direct();
  void commit();
  const std::string& path() const { return path_; }

 private:
  void write_out(const char* data, std::size_t size);

  std::string path_;
  std::string temp_path_;
  int fd_ = -1;
  bool committed_ = false;
  char* stage_ = nullptr;  // 4 MiB, page-aligned, while writing directly
  std::size_t staged_ = 0;
  int direct_blocks_ = 0;
  double direct_seconds_ = 0;
};

/// Whether names written to delimited outputs are guarded against spreadsheet formulas: a name
/// starting with = + - @ (or a tab or carriage return) is written with a leading apostrophe, which
/// the reader removes again. On by default; process-wide.
void set_formula_guard(bool on);

/// Writes `content` to `path` through an OutputFile.
void write_file_atomically(const std::string& path, std::string_view content);

/// Creates the folder (and its parents) if needed. Throws Error(kOutput) on failure.
void ensure_directory(const std::string& path);

}  // namespace pare
