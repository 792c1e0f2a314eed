// Cells that are not numbers: telling text from malformed numbers, and the message for each.
#include "internal/io_cells.h"

#include <algorithm>      // std::all_of
#include <string>         // std::string, std::to_string
#include <unordered_set>  // std::unordered_set
#include <vector>         // std::vector

namespace pare::internal {

std::string cell_text(const char* begin, const char* end) {
  return in_quotes(std::string_view(begin, static_cast<std::size_t>(end - begin)));
}

// Whether a cell that is not a number is text (a word: "plate1", "TP53", "chr17") rather than a
// malformed number ("1.2.3") or a gap spelled in a way --na does not list ("N/A", "NaN", "inf",
// "none"): after blanks, a quote and a sign, it starts with a letter (or a non-ASCII byte).
bool is_text_cell(const char* begin, const char* end) {
  while (begin < end && (*begin == ' ' || *begin == '\t' || *begin == '"')) ++begin;
  while (end > begin && (end[-1] == ' ' || end[-1] == '\t' || end[-1] == '"')) --end;
  if (begin < end && (*begin == '+' || *begin == '-')) ++begin;
  if (begin == end) return false;
  const auto c = static_cast<unsigned char>(*begin);
  if (!((c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || c >= 0x80)) return false;
  std::string lower(begin, end);
  for (char& ch : lower) ch = static_cast<char>(ch >= 'A' && ch <= 'Z' ? ch - 'A' + 'a' : ch);
  static const std::unordered_set<std::string> kGaps = {"na",   "n/a",  "nan",     "null",  "none",
                                                        "inf", "infinity", "missing", "nil"};
  if (kGaps.count(lower) > 0 || lower.rfind("nan(", 0) == 0) return false;
  return true;
}

// Whether most value fields of a rows=features line (after the id) are text: a line of labels
// rather than a text column. Only called for a line that failed, so its cost does not matter.
bool mostly_text_line(const char* line_begin, const char* line_end, char delim) {
  const std::vector<std::string> fields =
      split_fields(std::string_view(line_begin, static_cast<std::size_t>(line_end - line_begin)), delim);
  std::size_t text = 0;
  for (std::size_t i = 1; i < fields.size(); ++i)
    text += is_text_cell(fields[i].data(), fields[i].data() + fields[i].size());
  return 2 * text > fields.size() - 1;
}

// Reports a bad cell; `begin`..`end` is the field, `line_begin`..`line_end` its line. `column_name`
// names the cell's feature; `header_name` is the header's name of the field, for the hint when
// the cell is text (with `layout`, which option takes such a column). In rows=features a text
// column is met on the first feature line (`first_record`); text further down in a column of
// numbers is a stray cell, and a line of mostly text is a line of labels.
void fail_cell(Failure& f, CellStatus status, std::int64_t line, const char* line_begin, const char* line_end,
               const char* begin, const char* end, const std::string& column_name, const NaTokens& na,
               const std::string& header_name, Layout layout, char delim, bool first_record) {
  const std::int64_t column = begin - line_begin + 1;
  const bool text = status == CellStatus::kNotNumber && is_text_cell(begin, end);
  if (text && (layout == Layout::kRowsAreSamples || first_record || mostly_text_line(line_begin, line_end, delim))) {
    if (layout == Layout::kRowsAreSamples) {
      fail(f, line, column,
           "column " + in_quotes(header_name) + " holds text (" + cell_text(begin, end) + " on line " +
               std::to_string(line) + "), not numbers",
           "pass `label` " + header_name + " if it holds the classes, or `sample_info` " + header_name +
               " to carry it into samples.tsv");
    } else if (mostly_text_line(line_begin, line_end, delim)) {
      fail(f, line, column,
           "line " + in_quotes(column_name) + " holds text (" + cell_text(begin, end) + " in column " +
               in_quotes(header_name) + "), not numbers",
           "pass `label` " + column_name + " if it holds the classes");
    } else {
      fail(f, line, column,
           "column " + in_quotes(header_name) + " holds text (" + cell_text(begin, end) + " on line " +
               std::to_string(line) + "), not numbers",
           "pass `feature_info` " + header_name +
               " if it describes the features, e.g. gene symbols or chromosomes");
    }
    return;
  }
  if (status == CellStatus::kOutOfRange) {
    fail(f, line, column,
         "value " + cell_text(begin, end) + " in column " + in_quotes(column_name) +
             " is outside the float32 range (magnitude up to about 3.4e38)",
         "rescale the data before reading it");
  } else if (status == CellStatus::kInfinite) {
    fail(f, line, column,
         "infinite value " + cell_text(begin, end) + " in column " + in_quotes(column_name),
         "pass `allow_inf` to accept infinite values, or fix the export");
  } else {
    // A decimal comma (European spreadsheets, semicolon-separated): digits, one comma, digits.
    const std::string_view cell(begin, static_cast<std::size_t>(end - begin));
    const auto comma = cell.find(',');
    const auto digits = [](std::string_view d) {
      return !d.empty() && std::all_of(d.begin(), d.end(), [](char c) { return c >= '0' && c <= '9'; });
    };
    const std::string_view whole = !cell.empty() && (cell[0] == '-' || cell[0] == '+') ? cell.substr(1) : cell;
    const auto at = whole.find(',');
    const bool decimal_comma = comma != std::string_view::npos && digits(whole.substr(0, at)) &&
                               at != std::string_view::npos && digits(whole.substr(at + 1));
    fail(f, line, column,
         "cannot read " + cell_text(begin, end) + " in column " + in_quotes(column_name) +
             " as a number",
         decimal_comma ? "pare reads a decimal point: export the numbers with '.' as the decimal separator"
                       : "missing values must be one of: " + na.describe() + "; `na` sets the list");
  }
}

}  // namespace pare::internal
