#include "pare/load.h"

#include <fast_float/fast_float.h>

#include <algorithm>  // std::find, std::binary_search, std::all_of
#include <chrono>     // std::chrono::steady_clock
#include <cmath>      // std::isfinite
#include <limits>     // std::numeric_limits
#include <cstdlib>    // std::strtod
#include <future>     // std::async

#include "internal/sha256.h"
#include "internal/text_fields.h"
#include "pare/error.h"

namespace pare {

namespace {

// Labels that look like a mistake: classes that differ only by spaces around the name, and labels
// that look like a continuous measurement (many distinct numbers), which would be scored as that
// many classes.
void check_label_shapes(const FeatureTable& table, std::vector<std::string>& warnings) {
  const ClassCodes codes = encode_classes(table.labels);
  const auto trim = [](const std::string& s) {
    const auto b = s.find_first_not_of(" \t"), e = s.find_last_not_of(" \t");
    return b == std::string::npos ? std::string() : s.substr(b, e - b + 1);
  };
  for (const auto& name : codes.classes)
    if (trim(name) != name) {
      warnings.push_back("class '" + name + "' starts or ends with a space, so it is a class of its own" +
                         (std::binary_search(codes.classes.begin(), codes.classes.end(), trim(name))
                              ? ", apart from '" + trim(name) + "'"
                              : std::string()) +
                         " (check the label column)");
      break;
    }
  const auto n = static_cast<std::int64_t>(table.labels.size());
  const auto k = static_cast<std::int64_t>(codes.classes.size());
  if (k < 10 || 5 * k < n) return;
  for (const auto& name : codes.classes) {
    char* end = nullptr;
    (void)std::strtod(name.c_str(), &end);
    if (name.empty() || end != name.c_str() + name.size()) return;
  }
  warnings.push_back("the labels are " + std::to_string(k) + " distinct numbers among " + std::to_string(n) +
                     " samples: as labels they are that many classes, which gives a meaningless ranking "
                     "(score a continuous measurement with `target` instead, or group it into a few classes)");
}

// Leaves out the samples without a label and those of small classes, and says what it did.
void leave_out(const DataRequest& request, LoadedData& loaded) {
  FeatureTable& table = loaded.table;
  loaded.left_out = leave_out_samples(table, request.min_class_size, request.read.memory);
  const SamplesLeftOut& out = loaded.left_out;
  if (!out.unlabelled.empty())
    loaded.warnings.push_back(std::to_string(out.unlabelled.size()) + " sample" +
                              (out.unlabelled.size() == 1 ? "" : "s") + " without a label left out (" +
                              out.unlabelled.front() + (out.unlabelled.size() > 1 ? ", ..." : "") +
                              "; plan.json lists them)");
  if (!out.small_class.empty()) {
    std::string classes;
    for (const auto& c : out.small_classes) classes += (classes.empty() ? "" : ", ") + c;
    loaded.warnings.push_back(std::to_string(out.small_class.size()) + " samples of classes under `min_class_size` " +
                              std::to_string(request.min_class_size) + " left out: " + classes);
  }
  if (!table.has_labels() || table.n_samples() == 0)
    throw_input_error({table.labels_source.empty() ? table.source : table.labels_source},
                      "no sample is left with a label", "check the label column and `min_class_size`");
  check_label_shapes(table, loaded.warnings);
  const auto rare = rare_classes(table, 3);
  if (!rare.empty()) {
    std::string names;
    for (std::size_t k = 0; k < rare.size() && k < 10; ++k)
      names += (k ? ", " : "") + rare[k].first + " (" + std::to_string(rare[k].second) + ")";
    if (rare.size() > 10) names += ", ...";
    loaded.warnings.push_back("class" + std::string(rare.size() == 1 ? " " : "es ") + names + " ha" +
                              (rare.size() == 1 ? "s" : "ve") +
                              " fewer than 3 samples: scores are computed, but say little about such a class "
                              "(`min_class_size` 3 leaves them out)");
  }
}

using internal::in_quotes;

// Moves the label column to FeatureTable::target and parses it as numbers (a value that is not a
// finite number is an error, not a gap). A supervised run leaves out the samples without a value;
// another keeps them, with NaN.
void take_target(const SampleSheet& sheet, bool supervised, const MemoryBudget& budget, LoadedData& loaded) {
  FeatureTable& table = loaded.table;
  if (supervised) loaded.left_out = leave_out_samples(table, 0, budget);
  loaded.left_out.target = true;
  const auto& missing = loaded.left_out.unlabelled;
  if (!missing.empty())
    loaded.warnings.push_back(std::to_string(missing.size()) + " sample" + (missing.size() == 1 ? "" : "s") +
                              " without a target value left out (" + missing.front() +
                              (missing.size() > 1 ? ", ..." : "") + "; plan.json lists them)");
  const std::string& source = table.labels_source.empty() ? table.source : table.labels_source;
  const std::string name = table.label_name.empty() ? std::string("target") : table.label_name;
  std::vector<double> target(table.labels.size());
  for (std::size_t i = 0; i < table.labels.size(); ++i) {
    const std::string& text = table.labels[i];
    if (text.empty()) {
      target[i] = std::numeric_limits<double>::quiet_NaN();
      continue;
    }
    const char* end = text.data() + text.size();
    double v = 0;
    const auto parsed = fast_float::from_chars(text.data(), end, v);
    if (parsed.ec != std::errc() || parsed.ptr != end || !std::isfinite(v)) {
      Location where{source};
      if (!sheet.path.empty())
        for (std::size_t k = 0; k < sheet.ids.size(); ++k)
          if (sheet.ids[k] == table.sample_ids[i]) where.line = sheet.lines[k];
      throw_input_error(where,
                        "the target " + in_quotes(name) + " of sample " + in_quotes(table.sample_ids[i]) + " is " +
                            in_quotes(text) + ", not a finite number",
                        "a target is a measurement; for classes use a label instead");
    }
    target[i] = v;
  }
  if (!supervised) {
    table.target = std::move(target);
    table.labels.clear();
    return;
  }
  if (target.size() < 3)
    throw_input_error({source}, "the target " + in_quotes(name) + " has " + std::to_string(target.size()) +
                                    " sample" + (target.size() == 1 ? "" : "s") + " with a value; scoring needs at least 3");
  if (std::all_of(target.begin(), target.end(), [&](double v) { return v == target.front(); }))
    throw_input_error({source}, "the target " + in_quotes(name) + " has one value (" + table.labels.front() +
                                    ") in every sample used; scoring against it means nothing");
  table.target = std::move(target);
  table.labels.clear();
}

}  // namespace

const char* layout_name(Layout layout) {
  return layout == Layout::kRowsAreSamples ? "rows=samples" : "rows=features";
}

LoadedData load_data(const DataRequest& request) {
  const auto start = std::chrono::steady_clock::now();
  // The data file is hashed while it is parsed.
  std::future<std::string> data_hash;
  if (request.hash) data_hash = std::async(std::launch::async, [&] { return internal::sha256_file(request.path); });
  LoadedData loaded;
  const ReadOptions& options = request.read;
  SampleList list;
  if (!request.samples.empty()) list = read_sample_list(request.samples);
  SampleSheet sheet;
  const bool mark_from_info = std::find(options.sample_info.begin(), options.sample_info.end(), request.mark_by) !=
                              options.sample_info.end();
  if (!request.labels.empty()) {
    sheet = read_sample_sheet(request.labels);
    loaded.sheet_path = sheet.path;
    // A mark_by column that is not a sample-info column must be in the sheet: say so now.
    if (!request.mark_by.empty() && !mark_from_info) (void)sheet_column_values(sheet, request.mark_by, {});
  }
  loaded.table = read_table(request.path, options);
  FeatureTable& table = loaded.table;
  loaded.samples_read = table.n_samples();
  if (!request.samples.empty()) restrict_to_list(table, list, options.memory);
  if (!request.labels.empty()) attach_labels(table, sheet);
  if (request.target && table.has_labels())
    take_target(sheet, request.supervised, request.read.memory, loaded);
  else if (request.supervised && table.has_labels())
    leave_out(request, loaded);
  if (!request.mark_by.empty()) {
    const auto info = std::find(table.sample_info_names.begin(), table.sample_info_names.end(), request.mark_by);
    if (info != table.sample_info_names.end())
      loaded.marks = table.sample_info[static_cast<std::size_t>(info - table.sample_info_names.begin())];
    else
      loaded.marks = sheet_column_values(sheet, request.mark_by, table.sample_ids);
  }
  if (request.hash) {
    if (!request.samples.empty()) loaded.sample_list_sha256 = internal::sha256_file(request.samples);
    if (!loaded.sheet_path.empty()) loaded.sheet_sha256 = internal::sha256_file(loaded.sheet_path);
    loaded.data_sha256 = data_hash.get();
  }
  loaded.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  return loaded;
}

void require_two_classes(const FeatureTable& table) {
  const ClassCodes classes = encode_classes(table.labels);
  if (classes.classes.size() >= 2) return;
  throw_input_error({table.labels_source.empty() ? table.source : table.labels_source},
                    "the labels (" + (table.label_name.empty() ? std::string("label") : table.label_name) + ") have " +
                        (classes.classes.empty() ? std::string("no class") : "one class, " + classes.classes[0]) +
                        " among the samples used; scoring against a label needs at least two",
                    "check the label column, or leave out the labels to rank by variance");
}

RunRecord run_record(const DataRequest& request, const LoadedData& loaded, std::vector<std::string> command_line,
                     std::uint64_t seed) {
  RunRecord record;
  record.command_line = std::move(command_line);
  record.input_path = request.path;
  record.input_sha256 = loaded.data_sha256;
  if (!loaded.sheet_path.empty()) {
    record.sheet_path = loaded.sheet_path;
    record.sheet_sha256 = loaded.sheet_sha256;
    record.sheet_column = loaded.table.label_name;
  }
  record.label = request.read.label_column;
  record.target = request.target;
  record.na_tokens = request.read.na_tokens;
  record.allow_inf = request.read.allow_inf;
  record.seed = seed;
  record.feature_info = request.read.feature_info;
  record.sample_info = request.read.sample_info;
  record.samples_read = loaded.samples_read;
  if (!request.samples.empty()) {
    record.sample_list_path = request.samples;
    record.sample_list_sha256 = loaded.sample_list_sha256;
  }
  record.left_out = loaded.left_out;
  record.read_seconds = loaded.seconds;
  record.mark_name = request.mark_by;
  record.marks = loaded.marks;
  return record;
}

}  // namespace pare
