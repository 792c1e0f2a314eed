// Delimited text: the delimiter, fields, and the header line of a table or sample sheet.
#include "pare/io.h"

#include <algorithm>    // std::all_of, std::any_of, std::count, std::max
#include <cstdint>      // std::int64_t
#include <string>       // std::string
#include <string_view>  // std::string_view
#include <vector>       // std::vector

#include "internal/input_text.h"
#include "internal/text_fields.h"
#include "pare/error.h"

namespace pare {

using internal::read_text_field;

std::vector<std::string> default_na_tokens() { return {"", "NA", "NaN", "nan", "null", "?"}; }

std::string read_file_text(const std::string& path) {
  return std::string(internal::InputText::open(path).view());
}

char detect_delimiter(std::string_view header_line) {
  std::int64_t tabs = 0, commas = 0, semicolons = 0;
  bool in_quotes = false;
  for (char c : header_line) {
    if (c == '"') in_quotes = !in_quotes;
    if (in_quotes) continue;
    tabs += c == '\t';
    commas += c == ',';
    semicolons += c == ';';
  }
  if (tabs > commas && tabs >= semicolons) return '\t';
  if (semicolons > commas) return ';';
  return ',';
}

std::vector<std::string> split_fields(std::string_view line, char delimiter) {
  std::vector<std::string> fields;
  const char* p = line.data();
  const char* end = line.data() + line.size();
  std::string field;
  while (true) {
    read_text_field(p, end, delimiter, field);
    fields.push_back(field);
    if (p >= end) break;
    ++p;  // the delimiter
  }
  return fields;
}

namespace internal {

namespace {

// Where the text starts after a UTF-8 byte-order mark, if it has one.
const char* after_byte_order_mark(std::string_view text) {
  const bool mark = text.size() >= 3 && static_cast<unsigned char>(text[0]) == 0xEF &&
                    static_cast<unsigned char>(text[1]) == 0xBB && static_cast<unsigned char>(text[2]) == 0xBF;
  return text.data() + (mark ? 3 : 0);
}

}  // namespace

Header read_header(const std::string& path, std::string_view text, char delimiter) {
  const char* begin = after_byte_order_mark(text);
  const char* end = text.data() + text.size();
  if (begin == end)
    throw_input_error({path, 1, 1}, "the file is empty", "expected a header line naming the columns");
  const char* he = header_end(begin, end);
  const std::string_view line = strip_cr(std::string_view(begin, static_cast<std::size_t>(he - begin)));
  if (line.empty())
    throw_input_error({path, 1, 1}, "the header line is empty",
                      "the first line must name the columns");
  Header h;
  h.text_begin = text.data();
  h.data_begin = he < end ? he + 1 : end;
  h.first_data_line = 2 + std::count(begin, he, '\n');
  // Checked before the header is split: a file that is one enormous line (a header of millions
  // of names, or no line breaks at all) stops here, cheaply.
  if (std::all_of(h.data_begin, end, [](char c) { return c == '\n' || c == '\r' || c == ' ' || c == '\t'; }))
    throw_input_error({path, h.first_data_line, 1}, "no data lines after the header",
                      "each sample (or, with rows=features, each feature) needs a line of values");
  h.delimiter = delimiter ? delimiter : detect_delimiter(line);
  split_fields_at(line, h.delimiter, h.fields, h.columns);
  return h;
}

// The header of a text still arriving (InputText::streaming): waits until its first line is whole
// and something other than blank space follows it, or the text is complete, then reads it as
// read_header does.
Header read_arriving_header(const std::string& path, const internal::InputText& input, char delimiter) {
  std::size_t want = std::size_t{1} << 16;
  while (true) {
    bool complete = false;
    const std::string_view text = input.wait_for(want, complete);
    if (complete) return read_header(path, input.view(), delimiter);
    if (text.size() >= 3) {
      const char* end = text.data() + text.size();
      const char* he = header_end(after_byte_order_mark(text), end);
      if (he < end && std::any_of(he + 1, end, [](char c) { return c != '\n' && c != '\r' && c != ' ' && c != '\t'; }))
        return read_header(path, text, delimiter);
    }
    want = text.size() + std::max<std::size_t>(text.size(), std::size_t{1} << 20);
  }
}

std::string header_names_hint(const std::vector<std::string>& fields) {
  std::string out = "the header has: ";
  for (std::size_t i = 0; i < fields.size() && i < 8; ++i) {
    if (i) out += ", ";
    out += in_quotes(fields[i]);
  }
  if (fields.size() > 8) out += ", ... (" + std::to_string(fields.size()) + " columns)";
  return out;
}

std::string label_option(const ReadOptions& options) { return options.label_is_target ? "`target`" : "`label`"; }

std::int64_t label_field_of(const std::string& path, const Header& h, const ReadOptions& options) {
  if (options.label_column.empty()) return -1;
  for (std::size_t j = 1; j < h.fields.size(); ++j)
    if (h.fields[j] == options.label_column) return static_cast<std::int64_t>(j);
  if (!options.label_optional && !h.fields.empty() && h.fields[0] == options.label_column)
    throw_input_error({path, 1, h.columns[0]},
                      label_option(options) + " names " + in_quotes(options.label_column) + ", the id column",
                      "the first column holds the sample ids; name a column after it");
  if (!options.label_optional)
    throw_input_error({path, 1},
                      "no column named " + in_quotes(options.label_column) + " for " + label_option(options),
                      header_names_hint(h.fields));
  return -1;
}

}  // namespace internal

}  // namespace pare
