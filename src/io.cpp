#include "pare/io.h"

#include <algorithm>      // std::clamp, std::copy, std::find, std::max, std::min
#include <cstdint>        // std::int64_t
#include <span>           // std::span
#include <string>         // std::string
#include <string_view>    // std::string_view
#include <unordered_map>  // std::unordered_map
#include <unordered_set>  // std::unordered_set
#include <utility>        // std::move
#include <vector>         // std::vector

#include <omp.h>

#include "pare/error.h"
#include "pare/progress.h"

#include "internal/columns.h"
#include "internal/input_text.h"
#include "internal/io_cells.h"
#include "internal/omp.h"
#include "internal/text_chunks.h"
#include "internal/text_fields.h"

namespace pare {

using internal::any_failure;
using internal::CellContext;
using internal::CellStatus;
using internal::check_names;
using internal::Chunk;
using internal::count_records;
using internal::cut_chunks;
using internal::fail;
using internal::fail_cell;
using internal::Failure;
using internal::for_each_line;
using internal::Header;
using internal::header_names_hint;
using internal::in_quotes;
using internal::kChunkBytes;
using internal::kMissing;
using internal::kNameHint;
using internal::label_field_of;
using internal::label_option;
using internal::name_problem;
using internal::NaTokens;
using internal::number_chunks;
using internal::parse_cell;
using internal::plain_decimal_end;
using internal::read_arriving_header;
using internal::read_header;
using internal::read_text_field;
using internal::rethrow_first;
using internal::split_fields_at;

namespace {

// Rows of a rows=samples chunk parsed into a small column-major buffer before they are copied out,
// so each copy writes whole cache lines of the big column-major matrix instead of one float.
constexpr std::int64_t kRowBlock = 32;

void check_unique_sample_ids(const std::string& path, const std::vector<std::string>& ids,
                             const std::vector<std::int64_t>& lines,
                             const std::vector<std::int64_t>& columns) {
  std::unordered_map<std::string_view, std::size_t> seen;
  seen.reserve(ids.size() * 2);
  for (std::size_t i = 0; i < ids.size(); ++i) {
    const auto [it, fresh] = seen.emplace(ids[i], i);
    if (!fresh) {
      const std::string first = columns.empty()
                                    ? "first seen on line " + std::to_string(lines[it->second])
                                    : "first seen in column " + std::to_string(columns[it->second]);
      throw_input_error({path, lines[i], columns.empty() ? 1 : columns[i]},
                        "duplicate sample id " + in_quotes(ids[i]) + " (" + first + ")",
                        "sample ids must be unique");
    }
  }
}

// The header fields of the text columns named by --feature-info (rows=features) or --sample-info
// (rows=samples), in the order given. The checks that need no file are in check_info_options.
std::vector<std::int64_t> info_fields(const std::string& path, const Header& h, const std::vector<std::string>& names,
                                      const char* option, bool optional) {
  std::vector<std::int64_t> fields;
  for (const auto& name : names) {
    if (name == h.fields[0])
      throw_input_error({path, 1, h.columns[0]},
                        std::string(option) + " names " + in_quotes(name) + ", the id column",
                        "the first column holds the ids; name only text columns after it");
    const auto it = std::find(h.fields.begin() + 1, h.fields.end(), name);
    if (it == h.fields.end() && optional) continue;  // (a plan's column the new data lacks)
    if (it == h.fields.end())
      throw_input_error({path, 1}, "no column named " + in_quotes(name) + " for " + option,
                        header_names_hint(h.fields));
    fields.push_back(it - h.fields.begin());
  }
  return fields;
}

// For a text still arriving (a gzip file being inflated): cuts whole chunks from it as it comes
// (as cut_chunks would, `chunk_bytes` or more each, ending at a line end), counts their records
// (finding the line that starts with `label_row`, if given), numbers them, appends them to `chunks`
// and hands each to `parse` in file order, until `parse` returns false or the text is complete.
// Returns where the text not yet cut begins: the header's end for a text that is not arriving.
template <typename Parse>
const char* arrive_in_chunks(const internal::InputText& input, const Header& h,
                             std::size_t chunk_bytes, const std::string& label_row, char delim,
                             std::vector<Chunk>& chunks, Parse&& parse) {
  const char* pos = h.data_begin;
  if (!input.streaming()) return pos;
  const std::size_t size = std::max(kChunkBytes, chunk_bytes);
  std::int64_t line = h.first_data_line, record = 0;
  std::size_t want = static_cast<std::size_t>(pos - h.text_begin) + size + 1;
  while (true) {
    bool complete = false;
    const std::string_view have = input.wait_for(want, complete);
    if (complete) return pos;
    std::vector<Chunk> fresh = cut_chunks(pos, have.data() + have.size(), size, true);
    if (fresh.empty()) {
      want = have.size() + std::max<std::size_t>(size / 4, std::size_t{1} << 20);
      continue;
    }
    std::vector<std::vector<char>> windows(1);  // (unused: arriving text is in memory)
    count_records(fresh, label_row, delim, 1, input, windows);
    for (const Chunk& f : fresh) {
      chunks.push_back(f);
      Chunk& c = chunks.back();
      c.first_line = line;
      c.first_record = record;
      line += c.lines;
      record += c.records;
      if (!parse(c)) return c.end;
    }
    pos = fresh.back().end;
    want = static_cast<std::size_t>(pos - h.text_begin) + size + 1;
  }
}

// Where a chunk's values go: value k of record r at data[k * value_stride + (r - first_record) *
// record_stride]. Records are the rows of the matrix (rows=samples: value_stride is the number of
// rows, record_stride 1) or its columns (rows=features: value_stride 1, record_stride the number of
// rows); a chunk parsed while a gzip text arrives has a buffer of its own, laid out the same way.
struct Slice {
  float* data;
  std::int64_t first_record;
  std::int64_t value_stride;
  std::int64_t record_stride;
  bool on_disk;  // `data` is the matrix, held in a cache file
  float* record(std::int64_t r) const { return data + (r - first_record) * record_stride; }
};

// What the field j >= 1 of a data line is (RecordReader::kinds): the value of that index in the
// record (>= 0), the label (rows=samples), or text column c of --sample-info / --feature-info.
constexpr std::int64_t kLabelField = -1;
constexpr std::int64_t text_field(std::size_t c) {
  return -2 - static_cast<std::int64_t>(c);
}
constexpr std::size_t text_column(std::int64_t kind) {
  return static_cast<std::size_t>(-2 - kind);
}

// Reads a data line of either layout: its id (a sample id or a feature name), then each field as
// `kinds` says. The layouts differ only in where the values go (RecordReader::read's `values`).
class RecordReader {
 public:
  RecordReader(const Header& h, const NaTokens& na, const ReadOptions& options, Layout layout,
               std::vector<std::int64_t> kinds, std::vector<std::string>& ids,
               std::vector<std::string>* labels, std::vector<std::vector<std::string>>& text)
      : h_(h),
        na_(na),
        ctx_{h.delimiter, &na, options.allow_inf},
        plain_cells_(!na.has_numeric()),
        layout_(layout),
        kinds_(std::move(kinds)),
        ids_(ids),
        labels_(labels),
        text_(text),
        id_what_(layout == Layout::kRowsAreSamples ? "sample id " : "feature name "),
        fields_hint_(layout == Layout::kRowsAreSamples
                         ? "every line needs one field per header column"
                         : "every line needs one value per sample in the header") {}

  // Reads the data line [b, e), file line `line`, as record `record`: value k to values[k *
  // stride]. Returns false after recording its first problem in `failure`.
  bool read(const char* b, const char* e, std::int64_t line, std::int64_t record, float* values,
            std::int64_t stride, Failure& failure) const {
    const auto n_fields = static_cast<std::int64_t>(h_.fields.size());
    const char delim = h_.delimiter;
    const char* q = b;
    std::string& id = ids_[static_cast<std::size_t>(record)];
    read_text_field(q, e, delim, id);
    std::size_t at = 0;
    if (const char* problem = name_problem(id, at)) {
      fail(failure, line, 1, id_what_ + in_quotes(id) + " " + problem, kNameHint);
      return false;
    }
    internal::DelimiterScan scan(q, e, delim);
    for (std::int64_t j = 1; j < n_fields; ++j) {
      if (q >= e) {
        fail(
            failure, line, q - b + 1,
            "line has " + std::to_string(j) + " fields, the header has " + std::to_string(n_fields),
            fields_hint_);
        return false;
      }
      ++q;  // the delimiter
      const std::int64_t k = kinds_[static_cast<std::size_t>(j)];
      if (k < 0) {
        if (!read_text(q, b, e, line, record, j, k, failure)) return false;
        continue;
      }
      // The common cell first: a plain decimal that fills its field (the field's end comes from
      // the scan, so this value does not wait on the one before).
      const char* field_end = scan.next(q);
      float v;
      if (plain_cells_ && plain_decimal_end(q, e, v) == field_end) {
        values[k * stride] = v;
        q = field_end;
        continue;
      }
      const char* cell = q;
      const CellStatus s = parse_cell(q, e, ctx_, v);
      if (s != CellStatus::kOk) {
        const std::string& header_name = h_.fields[static_cast<std::size_t>(j)];
        fail_cell(failure, s, line, b, e, cell, q,
                  layout_ == Layout::kRowsAreSamples ? header_name : id, na_, header_name, layout_,
                  delim, record == 0);
        return false;
      }
      values[k * stride] = v;
    }
    if (q < e) {
      fail(failure, line, q - b + 1,
           "line has more fields than the header's " + std::to_string(n_fields), fields_hint_);
      return false;
    }
    return true;
  }

 private:
  // The label or a text column's field at `q`, of kind `k`.
  bool read_text(const char*& q, const char* b, const char* e, std::int64_t line,
                 std::int64_t record, std::int64_t j, std::int64_t k, Failure& failure) const {
    const std::int64_t column = q - b + 1;
    std::string& text = k == kLabelField ? (*labels_)[static_cast<std::size_t>(record)]
                                         : text_[text_column(k)][static_cast<std::size_t>(record)];
    read_text_field(q, e, h_.delimiter, text);
    std::size_t at = 0;
    if (const char* problem = name_problem(text, at)) {
      fail(failure, line, column,
           (k == kLabelField ? "label " : "value ") + in_quotes(text) +
               (k == kLabelField
                    ? ""
                    : " in column " + in_quotes(h_.fields[static_cast<std::size_t>(j)])) +
               " " + problem,
           kNameHint);
      return false;
    }
    if (k == kLabelField && na_.contains(text))
      text.clear();  // no label: the sample is left out of scoring
    return true;
  }

  const Header& h_;
  const NaTokens& na_;
  const CellContext ctx_;
  const bool plain_cells_;  // no missing-value token looks like a number: try plain decimals first
  const Layout layout_;
  const std::vector<std::int64_t> kinds_;
  std::vector<std::string>& ids_;
  std::vector<std::string>* labels_;
  std::vector<std::vector<std::string>>& text_;
  const std::string id_what_;
  const char* fields_hint_;
};

// The chunk driver of both layouts: cuts the text into chunks, parses those that arrive while a
// gzip text is inflated (each into a buffer of its own), counts and numbers the records of the
// rest, checks the file as a whole, allocates the matrix, copies the early chunks into it and
// parses the rest in parallel; the first failure in file order is thrown. `records` is the layout:
//   kRecordsAreRows    a record is a row of the matrix (rows=samples) or a column (rows=features)
//   width              values per record
//   chunk_bytes        the smallest chunk, label_row: the first field of a line of labels, if any
//   record_what        what a record is, for the message of a file without one
//   arriving(c, k)     whether chunk k may be parsed while the text arrives (else it waits)
//   counted(chunks)    checks once every chunk is counted and numbered
//   grow(n)            sizes the per-record text for n records
//   parse(c, k, slice, thread)  parses chunk k, its values into `slice`
template <typename Records>
void read_records(const std::string& path, const internal::InputText& input, const Header& h,
                  const ReadOptions& options, int threads, FeatureTable& t, Records& records,
                  ProgressStep& progress) {
  const std::int64_t width = records.width;
  std::vector<std::vector<char>> windows(static_cast<std::size_t>(threads));  // see for_each_line
  auto parse = [&](Chunk& c, std::size_t index, const Slice& s, int thread) {
    records.parse(c, index, s, thread, input, windows[static_cast<std::size_t>(thread)]);
    input.release(c.begin, c.end, true);
    progress.add(c.end - c.begin);
  };
  // The slice of `count` records from `first`, at `data`.
  auto slice = [&](float* data, std::int64_t first, std::int64_t count, bool on_disk) {
    return Records::kRecordsAreRows ? Slice{data, first, count, 1, on_disk}
                                    : Slice{data, first, 1, width, on_disk};
  };

  // A gzip file is parsed as it is inflated: whole chunks, one after another, each into its own
  // buffer (the number of records, and so the matrix, is known only at the end).
  std::vector<Chunk> chunks;
  std::vector<std::vector<float>> early;  // values of chunk k, parsed while the text arrived
  const char* rest = arrive_in_chunks(
      input, h, records.chunk_bytes, records.label_row, h.delimiter, chunks, [&](Chunk& c) {
        const std::size_t index = chunks.size() - 1;
        if (!records.arriving(c, index)) return false;
        records.grow(c.first_record + c.records);
        early.emplace_back(static_cast<std::size_t>(c.records * width));
        parse(c, index, slice(early.back().data(), c.first_record, c.records, false), 0);
        return !c.failure.set;
      });

  const std::string_view text = input.view();
  const auto first_late = chunks.size();
  const std::vector<Chunk> late = cut_chunks(rest, text.data() + text.size(), records.chunk_bytes);
  chunks.insert(chunks.end(), late.begin(), late.end());
  count_records(std::span<Chunk>(chunks).subspan(first_late), records.label_row, h.delimiter,
                threads, input, windows);
  const std::int64_t total = number_chunks(chunks, h.first_data_line);
  records.counted(chunks);
  if (total == 0)
    throw_input_error({path, h.first_data_line, 1}, "no data lines after the header",
                      std::string("each ") + records.record_what + " needs a line of values");
  if (any_failure(chunks)) rethrow_first(path, chunks);

  const std::int64_t rows = Records::kRecordsAreRows ? total : width;
  t.values.allocate(rows, Records::kRecordsAreRows ? width : total, options.memory);
  records.grow(total);
  float* const out = t.values.data();
  // An early chunk's buffer is the block of the matrix its records fill (column-major).
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads)
  for (std::size_t k = 0; k < early.size(); ++k) {
    const Chunk& c = chunks[k];
    const std::int64_t block_rows = Records::kRecordsAreRows ? c.records : width;
    const std::int64_t row0 = Records::kRecordsAreRows ? c.first_record : 0;
    const std::int64_t col0 = Records::kRecordsAreRows ? 0 : c.first_record;
    const std::int64_t block_cols =
        static_cast<std::int64_t>(early[k].size()) / std::max<std::int64_t>(block_rows, 1);
    for (std::int64_t j = 0; j < block_cols; ++j)
      std::copy_n(early[k].data() + j * block_rows, block_rows, out + (col0 + j) * rows + row0);
    std::vector<float>().swap(early[k]);
  }

  const Slice matrix = slice(out, 0, rows, t.values.on_disk());
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads)
  for (std::int64_t k = static_cast<std::int64_t>(first_late);
       k < static_cast<std::int64_t>(chunks.size()); ++k)
    parse(chunks[static_cast<std::size_t>(k)], static_cast<std::size_t>(k), matrix,
          omp_get_thread_num());
  if (any_failure(chunks)) rethrow_first(path, chunks);
}

// rows=samples: a record is a sample, its values a row of the matrix. Rows are parsed into a
// small column-major block (row_block rows) before they are copied out, so each copy writes whole
// cache lines of the column-major matrix instead of one float.
struct SampleRecords {
  static constexpr bool kRecordsAreRows = true;
  static constexpr const char* record_what = "sample";
  FeatureTable& t;
  const RecordReader& reader;
  std::int64_t width;
  std::int64_t row_block;
  std::size_t chunk_bytes;
  std::string label_row;  // (none)
  std::vector<std::int64_t> record_lines;
  std::vector<std::vector<float>> blocks;  // one per thread, reused for every chunk (a fresh one
                                           // would be zeroed and faulted in each time)

  bool arriving(const Chunk&, std::size_t) const { return true; }
  void counted(const std::vector<Chunk>&) const {}
  void grow(std::int64_t records) {
    t.sample_ids.resize(static_cast<std::size_t>(records));
    if (!t.label_name.empty()) t.labels.resize(static_cast<std::size_t>(records));
    for (auto& column : t.sample_info) column.resize(static_cast<std::size_t>(records));
    record_lines.resize(static_cast<std::size_t>(records));
  }

  void parse(Chunk& c, std::size_t, const Slice& s, int thread, const internal::InputText& input,
             std::vector<char>& window) {
    std::vector<float>& block = blocks[static_cast<std::size_t>(thread)];
    block.resize(static_cast<std::size_t>(row_block * width));
    std::int64_t block_first = c.first_record;  // record of block row 0
    std::int64_t in_block = 0;
    auto flush = [&]() {
      // On disk, a slice of columns at a time is written and given back, or the flush would map
      // a page of every column at once.
      constexpr std::int64_t kSlice = 256;
      for (std::int64_t j0 = 0; j0 < width; j0 += kSlice) {
        const std::int64_t j1 = std::min(width, j0 + kSlice);
        for (std::int64_t j = j0; j < j1; ++j)
          std::copy_n(block.data() + j * row_block, in_block,
                      s.record(block_first) + j * s.value_stride);
        if (s.on_disk) internal::release_column_span(t.values, j0, j1 - 1);
      }
      block_first += in_block;
      in_block = 0;
    };
    std::int64_t record = c.first_record;
    for_each_line(input, c, window, [&](const char* b, const char* e, std::int64_t local_line) {
      if (b == e) return true;
      const std::int64_t line = c.first_line + local_line - 1;
      record_lines[static_cast<std::size_t>(record)] = line;
      if (!reader.read(b, e, line, record, block.data() + in_block, row_block, c.failure))
        return false;
      ++record;
      if (++in_block == row_block) flush();
      return true;
    });
    if (!c.failure.set && in_block > 0) flush();
  }
};

FeatureTable read_rows_are_samples(const std::string& path, const internal::InputText& input,
                                   const Header& h, const ReadOptions& options,
                                   ProgressStep& progress) {
  const int threads = internal::thread_count(options.threads);
  const NaTokens na(options.na_tokens);
  const auto n_fields = static_cast<std::int64_t>(h.fields.size());
  const std::int64_t label_field = label_field_of(path, h, options);
  const std::vector<std::int64_t> info =
      info_fields(path, h, options.sample_info, "`sample_info`", options.info_optional);
  FeatureTable t;
  t.source = path;
  t.delimiter = h.delimiter;
  t.layout = Layout::kRowsAreSamples;
  t.id_name = h.fields[0];
  if (label_field >= 0) t.label_name = options.label_column;
  for (const std::int64_t field : info)
    t.sample_info_names.push_back(h.fields[static_cast<std::size_t>(field)]);
  t.sample_info.resize(info.size());
  // field -> its feature's index, the label, or a --sample-info column (field 0, the id, unused)
  std::vector<std::int64_t> kinds(static_cast<std::size_t>(n_fields), kLabelField);
  for (std::size_t c = 0; c < info.size(); ++c)
    kinds[static_cast<std::size_t>(info[c])] = text_field(c);
  for (std::int64_t j = 1; j < n_fields; ++j) {
    if (j == label_field || kinds[static_cast<std::size_t>(j)] < kLabelField) continue;
    kinds[static_cast<std::size_t>(j)] = static_cast<std::int64_t>(t.feature_names.size());
    t.feature_names.push_back(h.fields[static_cast<std::size_t>(j)]);
  }
  const auto p = static_cast<std::int64_t>(t.feature_names.size());
  if (p == 0)
    throw_input_error({path, 1}, "the header names no feature columns",
                      "the first column holds sample ids, the others features");

  // A data line is about as long as the header, which gives an estimate of the matrix's size. A
  // matrix bound for the disk is written in taller row blocks: each flush touches a page of every
  // column, and on disk those pages are given back after the flush.
  const auto header_bytes = static_cast<std::int64_t>(h.data_begin - h.text_begin);
  const std::int64_t estimate =
      (static_cast<std::int64_t>(input.expected_size()) / std::max<std::int64_t>(header_bytes, 1)) *
      p * 4;
  std::int64_t row_block = kRowBlock;
  if (!options.memory.fits(estimate))
    row_block =
        std::clamp<std::int64_t>(options.memory.bytes / (16 * threads * p), kRowBlock, 1024);

  const RecordReader reader(h, na, options, Layout::kRowsAreSamples, std::move(kinds), t.sample_ids,
                            &t.labels, t.sample_info);
  SampleRecords records{
      t,
      reader,
      p,
      row_block,
      static_cast<std::size_t>(header_bytes * 2 * row_block),  // 2 row blocks a chunk
      {},
      {},
      std::vector<std::vector<float>>(static_cast<std::size_t>(threads))};
  read_records(path, input, h, options, threads, t, records, progress);
  check_unique_sample_ids(path, t.sample_ids, records.record_lines, {});
  return t;
}

// rows=features: a record is a feature, its values a column of the matrix; one line (whose first
// field is the --label name) holds the labels.
struct FeatureRecords {
  static constexpr bool kRecordsAreRows = false;
  static constexpr const char* record_what = "feature";
  const std::string& path;
  FeatureTable& t;
  const RecordReader& reader;
  const NaTokens& na;
  const std::vector<std::int64_t>& kinds;
  const ReadOptions& options;
  std::int64_t width;
  std::size_t chunk_bytes = 0;
  std::string label_row;
  std::size_t label_chunk =
      static_cast<std::size_t>(-1);  // index of the chunk holding the label line

  // A chunk that holds a second label line is left for counted().
  bool arriving(const Chunk& c, std::size_t index) {
    if (c.label_line == 0) return true;
    if (label_chunk != static_cast<std::size_t>(-1) || c.second_label_line != 0) return false;
    label_chunk = index;
    return true;
  }

  void counted(const std::vector<Chunk>& chunks) {
    std::int64_t label_line = 0;
    for (std::size_t k = 0; k < chunks.size(); ++k) {
      const Chunk& c = chunks[k];
      if (c.label_line == 0) continue;
      if (c.second_label_line != 0 && label_line == 0)
        throw_input_error({path, c.first_line + c.second_label_line - 1, 1},
                          "a second line of labels named " + in_quotes(label_row),
                          "first seen on line " + std::to_string(c.first_line + c.label_line - 1));
      if (label_line != 0)
        throw_input_error({path, c.first_line + c.label_line - 1, 1},
                          "a second line of labels named " + in_quotes(label_row),
                          "first seen on line " + std::to_string(label_line));
      label_line = c.first_line + c.label_line - 1;
      label_chunk = k;
    }
    if (label_line == 0) t.label_name.clear();  // (an optional label line that is not there)
    if (!label_row.empty() && label_line == 0 && !options.label_optional)
      throw_input_error({path}, "no line starts with " + in_quotes(label_row) + " for " + label_option(options),
                        "with `layout` rows=features the labels are a line whose first field is "
                        "that name");
  }

  void grow(std::int64_t records) {
    t.feature_names.resize(static_cast<std::size_t>(records));
    for (auto& column : t.feature_info) column.resize(static_cast<std::size_t>(records));
  }

  bool read_label_line(Chunk& c, const char* b, const char* e, std::int64_t line) {
    std::vector<std::string> fields;
    std::vector<std::int64_t> columns;
    split_fields_at(std::string_view(b, static_cast<std::size_t>(e - b)), t.delimiter, fields,
                    columns);
    if (fields.size() != kinds.size()) {
      fail(c.failure, line, e - b + 1,
           "the label line has " + std::to_string(fields.size()) + " fields, the header has " +
               std::to_string(kinds.size()),
           "give one label per sample");
      return false;
    }
    t.labels.clear();
    for (std::size_t i = 1; i < fields.size(); ++i) {
      if (kinds[i] < 0) continue;  // the label line's field under a text column
      std::size_t at = 0;
      if (const char* problem = name_problem(fields[i], at)) {
        fail(c.failure, line, columns[i], "label " + in_quotes(fields[i]) + " " + problem,
             kNameHint);
        return false;
      }
      // A missing label is no label: the sample is left out of scoring.
      t.labels.push_back(na.contains(fields[i]) ? std::string() : std::move(fields[i]));
    }
    return true;
  }

  void parse(Chunk& c, std::size_t index, const Slice& s, int, const internal::InputText& input,
             std::vector<char>& window) {
    std::int64_t record = c.first_record;
    for_each_line(input, c, window, [&](const char* b, const char* e, std::int64_t local_line) {
      if (b == e) return true;
      const std::int64_t line = c.first_line + local_line - 1;
      if (index == label_chunk && local_line == c.label_line) return read_label_line(c, b, e, line);
      if (!reader.read(b, e, line, record, s.record(record), 1, c.failure)) return false;
      ++record;
      return true;
    });
    if (s.on_disk && c.records > 0)
      internal::release_column_span(t.values, c.first_record, c.first_record + c.records - 1);
  }
};

FeatureTable read_rows_are_features(const std::string& path, const internal::InputText& input,
                                    const Header& h, const ReadOptions& options,
                                    ProgressStep& progress) {
  const int threads = internal::thread_count(options.threads);
  const NaTokens na(options.na_tokens);
  const auto n_fields = static_cast<std::int64_t>(h.fields.size());
  const std::vector<std::int64_t> info =
      info_fields(path, h, options.feature_info, "`feature_info`", options.info_optional);
  const std::int64_t n = n_fields - 1 - static_cast<std::int64_t>(info.size());
  if (n <= 0)
    throw_input_error({path, 1}, "the header names no sample columns",
                      "with `layout` rows=features the header lists the sample ids");

  FeatureTable t;
  t.source = path;
  t.delimiter = h.delimiter;
  t.layout = Layout::kRowsAreFeatures;
  t.id_name = h.fields[0];
  t.label_name = options.label_column;
  for (const std::int64_t field : info)
    t.feature_info_names.push_back(h.fields[static_cast<std::size_t>(field)]);
  t.feature_info.resize(info.size());
  // field -> its sample's index, or the --feature-info column
  std::vector<std::int64_t> kinds(static_cast<std::size_t>(n_fields), 0);
  for (std::size_t c = 0; c < info.size(); ++c)
    kinds[static_cast<std::size_t>(info[c])] = text_field(c);
  std::vector<std::int64_t> columns;
  for (std::int64_t j = 1; j < n_fields; ++j) {
    if (kinds[static_cast<std::size_t>(j)] < 0) continue;
    kinds[static_cast<std::size_t>(j)] = static_cast<std::int64_t>(t.sample_ids.size());
    t.sample_ids.push_back(h.fields[static_cast<std::size_t>(j)]);
    columns.push_back(h.columns[static_cast<std::size_t>(j)]);
  }
  check_unique_sample_ids(path, t.sample_ids,
                          std::vector<std::int64_t>(static_cast<std::size_t>(n), 1), columns);

  const RecordReader reader(h, na, options, Layout::kRowsAreFeatures, kinds, t.feature_names,
                            nullptr, t.feature_info);
  FeatureRecords records{path, t, reader, na, kinds, options, n, 0, options.label_column};
  read_records(path, input, h, options, threads, t, records, progress);
  return t;
}

// The checks of --feature-info / --sample-info that need no file: the layout that takes each, no
// name twice, no empty name, not the label column.
void check_info_options(const ReadOptions& options) {
  const bool by_sample = options.layout == Layout::kRowsAreSamples;
  if (by_sample && !options.feature_info.empty())
    throw_usage_error("`feature_info` is for `layout` rows=features (a feature per line)",
                      "with rows=samples, text columns describing the samples are `sample_info` COLUMNS");
  if (!by_sample && !options.sample_info.empty())
    throw_usage_error("`sample_info` is for `layout` rows=samples (a sample per line)",
                      "with rows=features, text columns describing the features are `feature_info` COLUMNS");
  const char* option = by_sample ? "`sample_info`" : "`feature_info`";
  const std::vector<std::string>& names = by_sample ? options.sample_info : options.feature_info;
  for (std::size_t i = 0; i < names.size(); ++i) {
    if (names[i].empty())
      throw_usage_error(std::string(option) + " has an empty column name", "give comma-separated header names");
    if (std::find(names.begin(), names.begin() + static_cast<std::ptrdiff_t>(i), names[i]) !=
        names.begin() + static_cast<std::ptrdiff_t>(i))
      throw_usage_error(std::string(option) + " names " + in_quotes(names[i]) + " twice", "give each column once");
    if (by_sample && names[i] == options.label_column)
      throw_usage_error(std::string(option) + " names " + in_quotes(names[i]) + ", the " + label_option(options) +
                            " column",
                        "it is carried already; leave it out of `sample_info`");
  }
}

// Makes the feature names unique: the first of a name keeps it, later ones become NAME#2,
// NAME#3, ... (a suffix that would give a name the file already has is skipped), so that every
// command names the features of a file the same way. The renamed ones are listed in t.renamed.
void make_feature_names_unique(FeatureTable& t) {
  std::vector<std::string>& names = t.feature_names;
  std::unordered_set<std::string_view> taken;
  taken.reserve(names.size() * 2);
  std::vector<std::size_t> repeats;
  for (std::size_t j = 0; j < names.size(); ++j)
    if (!taken.insert(names[j]).second) repeats.push_back(j);
  if (repeats.empty()) return;
  // The new names are kept here, so the views in `taken` stay valid while names change.
  std::vector<std::string> made;
  made.reserve(repeats.size());
  std::unordered_map<std::string_view, std::int64_t> next;  // name -> next suffix to try
  for (const std::size_t j : repeats) {
    std::int64_t& k = next.try_emplace(*taken.find(names[j]), 2).first->second;
    std::string candidate;
    do candidate = names[j] + "#" + std::to_string(k++);
    while (taken.count(candidate) > 0);
    made.push_back(std::move(candidate));
    taken.insert(made.back());
  }
  t.renamed.reserve(repeats.size());
  for (std::size_t r = 0; r < repeats.size(); ++r) {
    const std::size_t j = repeats[r];
    t.renamed.emplace_back(static_cast<std::int64_t>(j), std::move(names[j]));
    names[j] = std::move(made[r]);
  }
}

}  // namespace

FeatureTable read_table(const std::string& path, const ReadOptions& options) {
  check_info_options(options);
  const internal::InputText input = internal::InputText::open(path, options.memory);
  try {
    const Header h = input.streaming() ? read_arriving_header(path, input, options.delimiter)
                                       : read_header(path, input.view(), options.delimiter);
    check_names(path, 1, h.fields, h.columns, "the column name");
    ProgressStep progress("reading", static_cast<std::int64_t>(input.expected_size()), "bytes");
    FeatureTable t = options.layout == Layout::kRowsAreSamples
                         ? read_rows_are_samples(path, input, h, options, progress)
                         : read_rows_are_features(path, input, h, options, progress);
    make_feature_names_unique(t);
    return t;
  } catch (const Error&) {
    // A damaged gzip stream is reported before anything found in the text it did give.
    (void)input.view();
    throw;
  }
}

}  // namespace pare
