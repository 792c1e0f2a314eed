// Sample sheets: reading one, taking a column of it, attaching its labels, coding the classes.
#include "pare/io.h"

#include <algorithm>      // std::find, std::lower_bound, std::sort, std::unique
#include <cstdint>        // std::int64_t
#include <cstring>        // std::memchr
#include <filesystem>     // std::filesystem::exists
#include <string>         // std::string
#include <string_view>    // std::string_view
#include <unordered_map>  // std::unordered_map
#include <vector>         // std::vector

#include "internal/text_fields.h"
#include "pare/error.h"

namespace pare {

using internal::check_names;
using internal::Header;
using internal::header_names_hint;
using internal::in_quotes;
using internal::kNameHint;
using internal::name_problem;
using internal::NaTokens;
using internal::read_header;
using internal::strip_cr;

SheetSpec parse_sheet_spec(const std::string& spec) {
  std::error_code ec;
  if (std::filesystem::exists(spec, ec)) return {spec, ""};
  const auto colon = spec.rfind(':');
  if (colon == std::string::npos || colon == 0) return {spec, ""};
  return {spec.substr(0, colon), spec.substr(colon + 1)};
}

SampleSheet read_sample_sheet(const std::string& spec, char delimiter) {
  SampleSheet sheet;
  SheetSpec parsed = parse_sheet_spec(spec);
  sheet.path = std::move(parsed.path);
  sheet.column = std::move(parsed.column);
  const std::string text = read_file_text(sheet.path);
  const Header h = read_header(sheet.path, text, delimiter);
  check_names(sheet.path, 1, h.fields, h.columns, "the column name");
  if (h.fields.size() < 2)
    throw_input_error({sheet.path, 1}, "a sample sheet needs at least two columns",
                      "first the sample id, then the label");
  std::size_t label_field = 1;
  if (!sheet.column.empty()) {
    const auto it = std::find(h.fields.begin() + 1, h.fields.end(), sheet.column);
    if (it == h.fields.end())
      throw_input_error({sheet.path, 1}, "the sample sheet has no column named " + in_quotes(sheet.column),
                        header_names_hint(h.fields));
    label_field = static_cast<std::size_t>(it - h.fields.begin());
  } else {
    sheet.column = h.fields[1];
  }
  sheet.header = h.fields;
  const NaTokens na(default_na_tokens());
  const char* p = h.data_begin;
  const char* end = text.data() + text.size();
  std::int64_t line = h.first_data_line - 1;
  std::unordered_map<std::string, std::int64_t> seen;
  while (p < end) {
    const char* nl = static_cast<const char*>(std::memchr(p, '\n', static_cast<std::size_t>(end - p)));
    const char* e = nl ? nl : end;
    ++line;
    const std::string_view text_line = strip_cr(std::string_view(p, static_cast<std::size_t>(e - p)));
    p = nl ? nl + 1 : end;
    if (text_line.empty()) continue;
    auto fields = split_fields(text_line, h.delimiter);
    if (fields.size() != h.fields.size())
      throw_input_error({sheet.path, line, static_cast<std::int64_t>(text_line.size()) + 1},
                        "line has " + std::to_string(fields.size()) + " fields, the header has " +
                            std::to_string(h.fields.size()),
                        "every line needs one field per header column");
    for (const std::size_t i : {std::size_t{0}, label_field}) {
      std::size_t at = 0;
      if (const char* problem = name_problem(fields[i], at))
        throw_input_error({sheet.path, line, 1},
                          std::string(i == 0 ? "sample id " : "label ") + in_quotes(fields[i]) + " " + problem, kNameHint);
    }
    const auto [it, fresh] = seen.emplace(fields[0], line);
    if (!fresh)
      throw_input_error({sheet.path, line, 1},
                        "duplicate sample id " + in_quotes(fields[0]) + " (first seen on line " +
                            std::to_string(it->second) + ")",
                        "each sample may appear once in the sample sheet");
    // A missing label is no label: the sample is left out of scoring.
    sheet.ids.push_back(fields[0]);
    sheet.labels.push_back(na.contains(fields[label_field]) ? std::string() : fields[label_field]);
    sheet.lines.push_back(line);
    sheet.cells.push_back(std::move(fields));
  }
  if (sheet.ids.empty())
    throw_input_error({sheet.path, h.first_data_line, 1},
                      "the sample sheet has no lines after the header",
                      "one line per sample: id, then label");
  return sheet;
}

std::vector<std::string> sheet_column_values(const SampleSheet& sheet, const std::string& column,
                                             const std::vector<std::string>& sample_ids) {
  const auto it = std::find(sheet.header.begin(), sheet.header.end(), column);
  if (it == sheet.header.end())
    throw_input_error({sheet.path, 1}, "the sample sheet has no column named " + in_quotes(column),
                      header_names_hint(sheet.header));
  const auto field = static_cast<std::size_t>(it - sheet.header.begin());
  std::unordered_map<std::string_view, std::size_t> by_id;
  by_id.reserve(sheet.ids.size() * 2);
  for (std::size_t i = 0; i < sheet.ids.size(); ++i) by_id.emplace(sheet.ids[i], i);
  const NaTokens na(default_na_tokens());
  std::vector<std::string> values(sample_ids.size());
  for (std::size_t i = 0; i < sample_ids.size(); ++i) {
    const auto row = by_id.find(sample_ids[i]);
    if (row == by_id.end()) continue;
    const std::string& value = sheet.cells[row->second][field];
    if (na.contains(value)) continue;
    std::size_t at = 0;
    if (const char* problem = name_problem(value, at))
      throw_input_error({sheet.path, sheet.lines[row->second], 1},
                        "value " + in_quotes(value) + " in column " + in_quotes(column) + " " + problem, kNameHint);
    values[i] = value;
  }
  return values;
}

void attach_labels(FeatureTable& table, const SampleSheet& sheet) {
  std::unordered_map<std::string_view, std::size_t> by_id;
  by_id.reserve(sheet.ids.size() * 2);
  for (std::size_t i = 0; i < sheet.ids.size(); ++i) by_id.emplace(sheet.ids[i], i);
  std::vector<std::string> labels(table.sample_ids.size());
  std::vector<std::string> unmatched;
  std::size_t n_unmatched = 0;
  for (std::size_t i = 0; i < table.sample_ids.size(); ++i) {
    const auto it = by_id.find(table.sample_ids[i]);
    if (it == by_id.end()) {
      if (unmatched.size() < 5) unmatched.push_back(in_quotes(table.sample_ids[i]));
      ++n_unmatched;
      continue;
    }
    labels[i] = sheet.labels[it->second];
  }
  if (n_unmatched == table.sample_ids.size())
    throw_input_error({sheet.path}, "no sample id in the sample sheet matches a sample of " + table.source,
                      "sheet ids look like " + in_quotes(sheet.ids.front()) + ", data ids like " +
                          in_quotes(table.sample_ids.front()) +
                          "; check the layout and the sheet's first column");
  if (n_unmatched > 0) {
    std::string names;
    for (const auto& u : unmatched) names += (names.empty() ? "" : ", ") + u;
    if (n_unmatched > unmatched.size()) names += ", ...";
    throw_input_error({sheet.path},
                      std::to_string(n_unmatched) + " of " + std::to_string(table.sample_ids.size()) +
                          " samples of " + table.source + " are not in the sample sheet: " + names,
                      "add them to the sheet or remove them from the data");
  }
  table.labels = std::move(labels);
  table.label_name = sheet.column;
  table.labels_source = sheet.path;
}

ClassCodes encode_classes(const std::vector<std::string>& labels) {
  ClassCodes codes;
  codes.classes = labels;
  std::sort(codes.classes.begin(), codes.classes.end());
  codes.classes.erase(std::unique(codes.classes.begin(), codes.classes.end()), codes.classes.end());
  codes.counts.assign(codes.classes.size(), 0);
  codes.codes.reserve(labels.size());
  for (const auto& l : labels) {
    const auto k = static_cast<int>(
        std::lower_bound(codes.classes.begin(), codes.classes.end(), l) - codes.classes.begin());
    codes.codes.push_back(k);
    ++codes.counts[static_cast<std::size_t>(k)];
  }
  return codes;
}

}  // namespace pare
