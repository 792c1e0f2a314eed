// Shared helpers for reading delimited text (pare's tables and sample sheets): quoting, names,
// missing-value tokens and the header line. Private to the library (src/io*.cpp, src/sample_sheet.cpp).
#pragma once

#include <algorithm>      // std::sort
#include <cstdint>        // std::int64_t
#include <cstring>        // std::memchr
#include <string>         // std::string
#include <string_view>    // std::string_view
#include <unordered_set>  // std::unordered_set
#include <vector>         // std::vector

#include "internal/format.h"
#include "internal/utf8.h"
#include "pare/error.h"
#include "pare/io.h"

namespace pare::internal {

class InputText;

inline std::string in_quotes(std::string_view s) {
  std::string out = "\"";
  out.append(s.substr(0, 60));
  if (s.size() > 60) out += "...";
  out += '"';
  return out;
}

inline std::string_view strip_cr(std::string_view line) {
  if (!line.empty() && line.back() == '\r') line.remove_suffix(1);
  return line;
}

// Position just past the end of the record starting at `p`: the next line break outside quotes.
// Only the header is read this way; data lines end at the next line break.
inline const char* header_end(const char* p, const char* end) {
  bool in_quotes = false;
  for (; p < end; ++p) {
    if (*p == '"') in_quotes = !in_quotes;
    else if (*p == '\n' && !in_quotes) return p;
  }
  return end;
}

// Reads the text field at `p` (stopping at `delim` or `end`), undoing CSV quoting; leaves `p` at
// the delimiter or at `end`.
inline void read_text_field(const char*& p, const char* end, char delim, std::string& out) {
  out.clear();
  if (p < end && *p == '"') {
    ++p;
    while (p < end) {
      if (*p == '"') {
        if (p + 1 < end && p[1] == '"') {
          out += '"';
          p += 2;
          continue;
        }
        ++p;
        break;
      }
      out += *p++;
    }
    // Anything between the closing quote and the delimiter is kept as written.
    while (p < end && *p != delim) out += *p++;
    internal::remove_formula_guard(out);
    return;
  }
  const char* stop = static_cast<const char*>(std::memchr(p, delim, static_cast<std::size_t>(end - p)));
  if (!stop) stop = end;
  out.assign(p, stop);
  p = stop;
  internal::remove_formula_guard(out);
}

// Names, ids and labels end up in every output (JSON among them), so they must be text: UTF-8
// without NUL bytes. Returns what is wrong with `name` (and sets `at` to the byte), or nullptr.
inline const char* name_problem(std::string_view name, std::size_t& at) {
  at = name.find('\0');
  if (at != std::string_view::npos) return "holds a NUL byte";
  at = internal::invalid_utf8_at(name);
  if (at != std::string_view::npos) return "is not valid UTF-8";
  return nullptr;
}

inline constexpr const char* kNameHint =
    "names, ids and labels must be UTF-8 text: is it a binary file, or text in another encoding? "
    "Convert it, e.g. with iconv -f latin1 -t utf-8";

// Checks every name of a split line (header, label line); throws at the first bad one.
inline void check_names(const std::string& path, std::int64_t line, const std::vector<std::string>& fields,
                 const std::vector<std::int64_t>& columns, const char* what) {
  for (std::size_t i = 0; i < fields.size(); ++i) {
    std::size_t at = 0;
    if (const char* problem = name_problem(fields[i], at))
      throw_input_error({path, line, columns[i]},
                        std::string(what) + " " + in_quotes(fields[i]) + " " + problem, kNameHint);
  }
}

// The set of missing-value tokens, for the slow path of cell parsing.
class NaTokens {
 public:
  explicit NaTokens(const std::vector<std::string>& tokens) : tokens_(tokens.begin(), tokens.end()) {
    for (const auto& t : tokens) {
      empty_is_missing_ |= t.empty();
      // A token such as -999 reads as a number, so the fast path of parse_cell must check it too.
      numeric_ |=
          !t.empty() && std::string_view("+-.0123456789").find(t[0]) != std::string_view::npos;
    }
  }
  bool has_numeric() const { return numeric_; }
  bool contains(std::string_view s) const {
    if (s.empty()) return empty_is_missing_;
    return tokens_.count(std::string(s)) > 0;
  }
  std::string describe() const {
    std::vector<std::string> sorted(tokens_.begin(), tokens_.end());
    std::sort(sorted.begin(), sorted.end());
    std::string out;
    for (const auto& t : sorted) {
      if (!out.empty()) out += ", ";
      out += t.empty() ? "an empty field" : t;
    }
    return out;
  }

 private:
  std::unordered_set<std::string> tokens_;
  bool empty_is_missing_ = false;
  bool numeric_ = false;
};

struct Header {
  std::vector<std::string> fields;
  std::vector<std::int64_t> columns;  // 1-based column where each field starts, quotes included
  const char* text_begin;             // the text's first byte
  const char* data_begin;             // first byte after the header line
  std::int64_t first_data_line;       // its 1-based line (a quoted name may hold a line break)
  char delimiter;
};

// Splits `line` like split_fields and also records where each field starts (1-based column), so
// error messages point at the field as written, quotes included.
inline void split_fields_at(std::string_view line, char delimiter, std::vector<std::string>& fields,
                            std::vector<std::int64_t>& columns) {
  fields.clear();
  columns.clear();
  const char* p = line.data();
  const char* end = line.data() + line.size();
  std::string field;
  while (true) {
    columns.push_back(p - line.data() + 1);
    read_text_field(p, end, delimiter, field);
    fields.push_back(field);
    if (p >= end) break;
    ++p;  // the delimiter
  }
}

// Defined in src/io_text.cpp.
Header read_header(const std::string& path, std::string_view text, char delimiter);
Header read_arriving_header(const std::string& path, const InputText& input, char delimiter);
std::string header_names_hint(const std::vector<std::string>& fields);
/// The option that named the label column, as messages name it: `label`, or `target`.
std::string label_option(const ReadOptions& options);
/// The label column's field in `h` (rows=samples), or -1 when none is asked for or an optional one is
/// absent; throws Error(kInput) when a required one is missing or names the id column.
std::int64_t label_field_of(const std::string& path, const Header& h, const ReadOptions& options);

}  // namespace pare::internal
