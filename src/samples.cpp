#include "pare/samples.h"

#include <algorithm>      // std::sort
#include <cstring>        // std::memchr
#include <unordered_map>  // std::unordered_map

#include "internal/columns.h"
#include "internal/utf8.h"
#include "pare/error.h"
#include "pare/io.h"

namespace pare {

namespace {

std::string quoted(std::string_view s) { return "'" + internal::printable(s) + "'"; }

}  // namespace

SampleList read_sample_list(const std::string& path) {
  SampleList list;
  list.path = path;
  const std::string text = read_file_text(path);
  std::size_t at = 0;
  if (text.size() >= 3 && text.compare(0, 3, "\xEF\xBB\xBF") == 0) at = 3;
  std::unordered_map<std::string, std::int64_t> seen;
  std::int64_t line = 0;
  while (at < text.size()) {
    const char* begin = text.data() + at;
    const auto* nl = static_cast<const char*>(std::memchr(begin, '\n', text.size() - at));
    std::string_view id(begin, nl ? static_cast<std::size_t>(nl - begin) : text.size() - at);
    at += id.size() + 1;
    ++line;
    if (!id.empty() && id.back() == '\r') id.remove_suffix(1);
    if (id.empty() || id.front() == '#') continue;
    if (id.find('\0') != std::string_view::npos || internal::invalid_utf8_at(id) != std::string_view::npos)
      throw_input_error({path, line, 1}, "sample id " + quoted(id) + " is not UTF-8 text",
                        "the list holds one sample id per line, as text");
    const auto [it, fresh] = seen.emplace(std::string(id), line);
    if (!fresh)
      throw_input_error({path, line, 1},
                        "sample id " + quoted(id) + " is listed twice (first on line " + std::to_string(it->second) + ")",
                        "list each sample once");
    list.ids.emplace_back(id);
    list.lines.push_back(line);
  }
  if (list.ids.empty())
    throw_input_error({path}, "the sample list names no sample",
                      "one sample id per line; lines starting with # are ignored");
  return list;
}

void keep_samples(FeatureTable& table, std::span<const std::int64_t> rows, const MemoryBudget& budget) {
  if (static_cast<std::int64_t>(rows.size()) == table.n_samples()) return;  // every row, in order
  const auto n = static_cast<Eigen::Index>(rows.size());
  Columns values;
  values.allocate(n, table.n_features(), budget);
  const bool on_disk = table.values.on_disk() || values.on_disk();
  for (Eigen::Index j = 0; j < table.n_features(); ++j) {
    const float* from = table.values.col(j).data();
    float* to = values.col(j).data();
    for (Eigen::Index k = 0; k < n; ++k) to[k] = from[rows[static_cast<std::size_t>(k)]];
    if (on_disk) {
      internal::release_column_span(table.values, j, j);
      internal::release_column_span(values, j, j);
    }
  }
  table.values = std::move(values);
  auto pick = [&](std::vector<std::string>& v) {
    if (v.empty()) return;
    std::vector<std::string> kept;
    kept.reserve(rows.size());
    for (const std::int64_t i : rows) kept.push_back(std::move(v[static_cast<std::size_t>(i)]));
    v = std::move(kept);
  };
  pick(table.sample_ids);
  pick(table.labels);
  if (!table.target.empty()) {
    std::vector<double> kept;
    kept.reserve(rows.size());
    for (const std::int64_t i : rows) kept.push_back(table.target[static_cast<std::size_t>(i)]);
    table.target = std::move(kept);
  }
  for (auto& column : table.sample_info) pick(column);
}

void restrict_to_list(FeatureTable& table, const SampleList& list, const MemoryBudget& budget) {
  std::unordered_map<std::string_view, std::int64_t> row_of;
  row_of.reserve(table.sample_ids.size() * 2);
  for (std::size_t i = 0; i < table.sample_ids.size(); ++i)
    row_of.emplace(table.sample_ids[i], static_cast<std::int64_t>(i));
  std::vector<std::int64_t> rows;
  rows.reserve(list.ids.size());
  for (std::size_t k = 0; k < list.ids.size(); ++k) {
    const auto it = row_of.find(list.ids[k]);
    if (it != row_of.end()) {
      rows.push_back(it->second);
      continue;
    }
    const bool is_feature =
        std::find(table.feature_names.begin(), table.feature_names.end(), list.ids[k]) != table.feature_names.end();
    const std::string hint =
        is_feature ? std::string("it is a feature of ") + table.source + ": is the layout the other one (`layout` " +
                         (table.layout == Layout::kRowsAreSamples ? "rows=features" : "rows=samples") + ")?"
                   : "samples of " + table.source + " look like " + quoted(table.sample_ids.front());
    throw_input_error({list.path, list.lines[k], 1}, "sample " + quoted(list.ids[k]) + " is not in " + table.source,
                      hint);
  }
  std::sort(rows.begin(), rows.end());
  keep_samples(table, rows, budget);
}

SamplesLeftOut leave_out_samples(FeatureTable& table, std::int64_t min_class_size, const MemoryBudget& budget) {
  SamplesLeftOut out;
  out.min_class_size = min_class_size;
  if (!table.has_labels()) return out;
  std::unordered_map<std::string_view, std::int64_t> size;
  for (const auto& label : table.labels)
    if (!label.empty()) ++size[label];
  for (const auto& [label, count] : size)
    if (count < min_class_size) out.small_classes.emplace_back(label);
  std::sort(out.small_classes.begin(), out.small_classes.end());
  std::vector<std::int64_t> rows;
  rows.reserve(table.labels.size());
  for (std::size_t i = 0; i < table.labels.size(); ++i) {
    const std::string& label = table.labels[i];
    if (label.empty()) {
      out.unlabelled.push_back(table.sample_ids[i]);
    } else if (size[label] < min_class_size) {
      out.small_class.push_back(table.sample_ids[i]);
    } else {
      rows.push_back(static_cast<std::int64_t>(i));
    }
  }
  if (!out.empty()) keep_samples(table, rows, budget);
  return out;
}

std::vector<std::pair<std::string, std::int64_t>> rare_classes(const FeatureTable& table, std::int64_t below) {
  std::vector<std::pair<std::string, std::int64_t>> rare;
  if (!table.has_labels()) return rare;
  const ClassCodes codes = encode_classes(table.labels);
  for (std::size_t c = 0; c < codes.classes.size(); ++c)
    if (!codes.classes[c].empty() && codes.counts[c] < below) rare.emplace_back(codes.classes[c], codes.counts[c]);
  return rare;
}

}  // namespace pare
