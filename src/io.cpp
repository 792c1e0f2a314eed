#include "pare/io.h"

#include <omp.h>

#include <algorithm>      // std::clamp, std::copy, std::find, std::max, std::min
#include <cstdint>        // std::int64_t
#include <cstring>        // std::memchr
#include <span>           // std::span
#include <string>         // std::string
#include <string_view>    // std::string_view
#include <unordered_map>  // std::unordered_map
#include <unordered_set>  // std::unordered_set
#include <vector>         // std::vector

#include "internal/buffer.h"
#include "internal/io_cells.h"
#include "internal/omp.h"
#include "internal/spill.h"
#include "internal/text_fields.h"
#include "pare/error.h"
#include "pare/progress.h"

namespace pare {

using internal::check_names;
using internal::CellContext;
using internal::CellStatus;
using internal::fail;
using internal::fail_cell;
using internal::Failure;
using internal::Header;
using internal::header_names_hint;
using internal::in_quotes;
using internal::kNameHint;
using internal::kMissing;
using internal::name_problem;
using internal::NaTokens;
using internal::parse_cell;
using internal::read_arriving_header;
using internal::read_header;
using internal::read_text_field;
using internal::split_fields_at;

namespace {

// Chunks are cut by size, not by thread count, so which lines a chunk holds never depends on
// --threads; each line writes only its own row (or column), so the result cannot either.
constexpr std::size_t kChunkBytes = std::size_t{4} << 20;
// Rows of a rows=samples chunk parsed into a small column-major buffer before they are copied out,
// so each copy writes whole cache lines of the big column-major matrix instead of one float.
constexpr std::int64_t kRowBlock = 32;

struct Chunk {
  const char* begin = nullptr;
  const char* end = nullptr;
  std::int64_t lines = 0;      // line breaks (= lines) in the chunk
  std::int64_t records = 0;    // non-blank lines that are data records
  std::int64_t label_line = 0;  // 1-based line within the chunk of the label row, 0 if none
  std::int64_t second_label_line = 0;  // another label row in the same chunk, 0 if none
  std::int64_t first_line = 0;  // 1-based file line of the chunk's first line
  std::int64_t first_record = 0;
  Failure failure;
};

// `min_bytes` raises the chunk size for very long lines, so that a chunk holds enough lines for the
// row blocks of rows=samples to fill (it depends on the header only, never on --threads).
// With `arriving`, the text past `end` is still to come: only chunks of full size that end at a
// line end are cut, and the rest is left for later.
std::vector<Chunk> cut_chunks(const char* begin, const char* end, std::size_t min_bytes = 0, bool arriving = false) {
  const std::size_t chunk_bytes = std::max(kChunkBytes, min_bytes);
  std::vector<Chunk> chunks;
  const char* p = begin;
  while (p < end) {
    if (arriving && static_cast<std::size_t>(end - p) <= chunk_bytes) break;
    const char* stop = p + std::min<std::size_t>(chunk_bytes, static_cast<std::size_t>(end - p));
    if (stop < end) {
      const char* nl = static_cast<const char*>(std::memchr(stop, '\n', static_cast<std::size_t>(end - stop)));
      if (!nl && arriving) break;
      stop = nl ? nl + 1 : end;
    }
    Chunk c;
    c.begin = p;
    c.end = stop;
    chunks.push_back(c);
    p = stop;
  }
  return chunks;
}

// Calls fn(line_begin, line_end, line_number_within_chunk) for each line of the chunk, the '\r'
// of a CRLF line break removed.
template <typename Fn>
void for_each_line(const Chunk& chunk, Fn&& fn) {
  const char* p = chunk.begin;
  std::int64_t line = 0;
  while (p < chunk.end) {
    const char* nl = static_cast<const char*>(std::memchr(p, '\n', static_cast<std::size_t>(chunk.end - p)));
    const char* e = nl ? nl : chunk.end;
    ++line;
    const char* le = (e > p && e[-1] == '\r') ? e - 1 : e;
    if (!fn(p, le, line)) return;
    p = nl ? nl + 1 : chunk.end;
  }
}

// True when the line's first field is `name` (plain or quoted) followed by the delimiter.
bool starts_with_field(const char* b, const char* e, std::string_view name, char delim) {
  const char* p = b;
  std::string field;
  read_text_field(p, e, delim, field);
  return field == name;
}

}  // namespace

namespace {

// First pass over the chunks: count lines and records, find the label row (rows=features).
void count_records(std::span<Chunk> chunks, const std::string& label_row, char delim,
                   int threads, const internal::InputText& input) {
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads)
  for (std::int64_t i = 0; i < static_cast<std::int64_t>(chunks.size()); ++i) {
    Chunk& c = chunks[static_cast<std::size_t>(i)];
    for_each_line(c, [&](const char* b, const char* e, std::int64_t line) {
      c.lines = line;
      if (b == e) return true;
      if (!label_row.empty() && starts_with_field(b, e, label_row, delim)) {
        if (c.label_line == 0) {
          c.label_line = line;
          return true;
        }
        if (c.second_label_line == 0) c.second_label_line = line;  // reported once lines are numbered
        return true;
      }
      ++c.records;
      return true;
    });
    input.release(c.begin, c.end, false);
  }
}

std::int64_t number_chunks(std::vector<Chunk>& chunks, std::int64_t first_line) {
  std::int64_t line = first_line, record = 0;
  for (auto& c : chunks) {
    c.first_line = line;
    c.first_record = record;
    line += c.lines;
    record += c.records;
  }
  return record;
}

[[noreturn]] void rethrow_first(const std::string& path, const std::vector<Chunk>& chunks) {
  for (const auto& c : chunks)
    if (c.failure.set)
      throw_input_error({path, c.failure.line, c.failure.column}, c.failure.what, c.failure.hint);
  throw Error(ErrorKind::kOther, "internal: rethrow_first without a failure");
}

bool any_failure(const std::vector<Chunk>& chunks) {
  for (const auto& c : chunks)
    if (c.failure.set) return true;
  return false;
}

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
const char* arrive_in_chunks(const internal::InputText& input, const Header& h, std::size_t chunk_bytes,
                             const std::string& label_row, char delim, std::vector<Chunk>& chunks, Parse&& parse) {
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
    count_records(fresh, label_row, delim, 1, input);
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

FeatureTable read_rows_are_samples(const std::string& path, const internal::InputText& input, const Header& h,
                                   const ReadOptions& options, ProgressStep& progress) {
  const char delim = h.delimiter;
  const int threads = internal::thread_count(options.threads);
  const NaTokens na(options.na_tokens);
  const auto n_fields = static_cast<std::int64_t>(h.fields.size());

  std::int64_t label_field = -1;
  if (!options.label_column.empty()) {
    for (std::int64_t j = 1; j < n_fields && label_field < 0; ++j)
      if (h.fields[static_cast<std::size_t>(j)] == options.label_column) label_field = j;
    if (label_field < 0 && !options.label_optional)
      throw_input_error({path, 1}, "no column named " + in_quotes(options.label_column) +
                                       " for --label",
                        header_names_hint(h.fields));
  }
  const std::vector<std::int64_t> info = info_fields(path, h, options.sample_info, "--sample-info", options.info_optional);
  FeatureTable t;
  t.source = path;
  t.delimiter = delim;
  t.layout = Layout::kRowsAreSamples;
  t.id_name = h.fields[0];
  if (label_field >= 0) t.label_name = options.label_column;
  for (const std::int64_t field : info) t.sample_info_names.push_back(h.fields[static_cast<std::size_t>(field)]);
  t.sample_info.resize(info.size());
  // field index -> feature index (-1 for the id and the label column, -2 - c for the text
  // column c of --sample-info)
  std::vector<std::int64_t> feature_of(static_cast<std::size_t>(n_fields), -1);
  for (std::size_t c = 0; c < info.size(); ++c)
    feature_of[static_cast<std::size_t>(info[c])] = -2 - static_cast<std::int64_t>(c);
  for (std::int64_t j = 1; j < n_fields; ++j) {
    if (j == label_field || feature_of[static_cast<std::size_t>(j)] < -1) continue;
    feature_of[static_cast<std::size_t>(j)] = static_cast<std::int64_t>(t.feature_names.size());
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
      (static_cast<std::int64_t>(input.expected_size()) / std::max<std::int64_t>(header_bytes, 1)) * p * 4;
  std::int64_t row_block = kRowBlock;
  if (!options.memory.fits(estimate))
    row_block = std::clamp<std::int64_t>(options.memory.bytes / (16 * threads * p), kRowBlock, 1024);
  // Aim for 2 row blocks per chunk.
  const auto chunk_bytes = static_cast<std::size_t>(header_bytes * 2 * row_block);

  std::vector<std::int64_t> record_lines;
  auto grow_records = [&](std::int64_t records) {
    t.sample_ids.resize(static_cast<std::size_t>(records));
    if (label_field >= 0) t.labels.resize(static_cast<std::size_t>(records));
    for (auto& column : t.sample_info) column.resize(static_cast<std::size_t>(records));
    record_lines.resize(static_cast<std::size_t>(records));
  };
  const CellContext ctx{delim, &na, options.allow_inf};
  bool on_disk = false;

  // Parses chunk `c` into `out`: value (record r, feature j) at out[j * ld + r - base]. Rows go
  // through `block` (row_block rows, column-major) so each copy writes whole cache lines.
  auto parse = [&](Chunk& c, float* out, std::int64_t ld, std::int64_t base, std::vector<float>& block) {
    block.resize(static_cast<std::size_t>(row_block * p));
    std::int64_t block_first = c.first_record;  // record index of block row 0
    std::int64_t in_block = 0;
    auto flush = [&]() {
      // On disk, a slice of columns at a time is written and given back, or the flush would map
      // a page of every column at once.
      constexpr std::int64_t kSlice = 256;
      for (std::int64_t j0 = 0; j0 < p; j0 += kSlice) {
        const std::int64_t j1 = std::min(p, j0 + kSlice);
        for (std::int64_t j = j0; j < j1; ++j)
          std::copy_n(block.data() + j * row_block, in_block, out + j * ld + block_first - base);
        if (on_disk) internal::release_column_span(t.values, j0, j1 - 1);
      }
      block_first += in_block;
      in_block = 0;
    };
    std::int64_t record = c.first_record;
    for_each_line(c, [&](const char* b, const char* e, std::int64_t local_line) {
      if (b == e) return true;
      const std::int64_t line = c.first_line + local_line - 1;
      record_lines[static_cast<std::size_t>(record)] = line;
      const char* q = b;
      read_text_field(q, e, delim, t.sample_ids[static_cast<std::size_t>(record)]);
      std::size_t at = 0;
      if (const char* problem = name_problem(t.sample_ids[static_cast<std::size_t>(record)], at)) {
        fail(c.failure, line, 1, "sample id " + in_quotes(t.sample_ids[static_cast<std::size_t>(record)]) + " " + problem,
             kNameHint);
        return false;
      }
      float* row = block.data() + in_block;
      for (std::int64_t j = 1; j < n_fields; ++j) {
        if (q >= e) {
          fail(c.failure, line, q - b + 1,
               "line has " + std::to_string(j) + " fields, the header has " +
                   std::to_string(n_fields),
               "every line needs one field per header column");
          return false;
        }
        ++q;  // the delimiter
        const std::int64_t f = feature_of[static_cast<std::size_t>(j)];
        if (f < 0) {
          // The label, or a --sample-info column: text.
          const std::int64_t column = q - b + 1;
          std::string& text = f == -1 ? t.labels[static_cast<std::size_t>(record)]
                                      : t.sample_info[static_cast<std::size_t>(-2 - f)][static_cast<std::size_t>(record)];
          read_text_field(q, e, delim, text);
          if (const char* problem = name_problem(text, at)) {
            fail(c.failure, line, column,
                 (f == -1 ? "label " : "value ") + in_quotes(text) +
                     (f == -1 ? "" : " in column " + in_quotes(h.fields[static_cast<std::size_t>(j)])) + " " + problem,
                 kNameHint);
            return false;
          }
          if (f == -1 && na.contains(text)) text.clear();  // no label: the sample is left out of scoring
          continue;
        }
        const char* cell = q;
        float v;
        const CellStatus s = parse_cell(q, e, ctx, v);
        if (s != CellStatus::kOk) {
          fail_cell(c.failure, s, line, b, e, cell, q, t.feature_names[static_cast<std::size_t>(f)], na,
                    t.feature_names[static_cast<std::size_t>(f)], Layout::kRowsAreSamples, delim, record == 0);
          return false;
        }
        row[f * row_block] = v;
      }
      if (q < e) {
        fail(c.failure, line, q - b + 1,
             "line has more fields than the header's " + std::to_string(n_fields),
             "every line needs one field per header column");
        return false;
      }
      ++record;
      if (++in_block == row_block) flush();
      return true;
    });
    if (!c.failure.set && in_block > 0) flush();
    input.release(c.begin, c.end, true);
    progress.add(c.end - c.begin);
  };

  // A gzip file is parsed as it is inflated: whole chunks, one after another, each into its own
  // buffer (the number of samples, and so the matrix, is known only at the end).
  std::vector<Chunk> chunks;
  std::vector<std::vector<float>> early;  // values of chunk k, parsed while the text arrived
  std::vector<float> early_block;
  const char* rest = arrive_in_chunks(input, h, chunk_bytes, {}, delim, chunks, [&](Chunk& c) {
    grow_records(c.first_record + c.records);
    early.emplace_back(static_cast<std::size_t>(c.records * p));
    parse(c, early.back().data(), c.records, c.first_record, early_block);
    return !c.failure.set;
  });

  const std::string_view text = input.view();
  const char* end = text.data() + text.size();
  const auto first_late = chunks.size();
  const std::vector<Chunk> late = cut_chunks(rest, end, chunk_bytes);
  chunks.insert(chunks.end(), late.begin(), late.end());
  count_records(std::span<Chunk>(chunks).subspan(first_late), {}, delim, threads, input);
  const std::int64_t n = number_chunks(chunks, h.first_data_line);
  if (n == 0)
    throw_input_error({path, h.first_data_line, 1}, "no data lines after the header",
                      "each sample needs a line of values");
  if (any_failure(chunks)) rethrow_first(path, chunks);

  t.values.allocate(n, p, options.memory);
  grow_records(n);
  float* const out = t.values.data();
  on_disk = t.values.on_disk();
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads)
  for (std::size_t k = 0; k < early.size(); ++k) {
    const Chunk& c = chunks[k];
    for (std::int64_t j = 0; j < p; ++j)
      std::copy_n(early[k].data() + j * c.records, c.records, out + j * n + c.first_record);
    std::vector<float>().swap(early[k]);
  }

  // One row block per thread, reused for every chunk: a fresh one per chunk would be zeroed and
  // faulted in again each time (6 MB per chunk at 100,000 features).
  std::vector<std::vector<float>> blocks(static_cast<std::size_t>(threads));
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads)
  for (std::int64_t ci = static_cast<std::int64_t>(first_late); ci < static_cast<std::int64_t>(chunks.size()); ++ci)
    parse(chunks[static_cast<std::size_t>(ci)], out, n, 0, blocks[static_cast<std::size_t>(omp_get_thread_num())]);
  if (any_failure(chunks)) rethrow_first(path, chunks);
  check_unique_sample_ids(path, t.sample_ids, record_lines, {});
  return t;
}

FeatureTable read_rows_are_features(const std::string& path, const internal::InputText& input, const Header& h,
                                    const ReadOptions& options, ProgressStep& progress) {
  const char delim = h.delimiter;
  const int threads = internal::thread_count(options.threads);
  const NaTokens na(options.na_tokens);
  const auto n_fields = static_cast<std::int64_t>(h.fields.size());
  const std::vector<std::int64_t> info = info_fields(path, h, options.feature_info, "--feature-info", options.info_optional);
  // field index -> --feature-info column, -1 for a sample (and the id)
  std::vector<std::int64_t> info_of(static_cast<std::size_t>(n_fields), -1);
  for (std::size_t c = 0; c < info.size(); ++c) info_of[static_cast<std::size_t>(info[c])] = static_cast<std::int64_t>(c);
  const bool has_info = !info.empty();
  const std::int64_t n = n_fields - 1 - static_cast<std::int64_t>(info.size());
  if (n <= 0)
    throw_input_error({path, 1}, "the header names no sample columns",
                      "with --layout rows=features the header lists the sample ids");

  FeatureTable t;
  t.source = path;
  t.delimiter = delim;
  t.layout = Layout::kRowsAreFeatures;
  t.id_name = h.fields[0];
  t.label_name = options.label_column;
  for (const std::int64_t field : info) t.feature_info_names.push_back(h.fields[static_cast<std::size_t>(field)]);
  t.feature_info.resize(info.size());
  {
    std::vector<std::int64_t> columns;
    for (std::int64_t j = 1; j < n_fields; ++j) {
      if (info_of[static_cast<std::size_t>(j)] >= 0) continue;
      t.sample_ids.push_back(h.fields[static_cast<std::size_t>(j)]);
      columns.push_back(h.columns[static_cast<std::size_t>(j)]);
    }
    std::vector<std::int64_t> lines(static_cast<std::size_t>(n), 1);
    check_unique_sample_ids(path, t.sample_ids, lines, columns);
  }
  auto grow_features = [&](std::int64_t features) {
    t.feature_names.resize(static_cast<std::size_t>(features));
    for (auto& column : t.feature_info) column.resize(static_cast<std::size_t>(features));
  };

  const CellContext ctx{delim, &na, options.allow_inf};
  std::size_t label_chunk = static_cast<std::size_t>(-1);  // index of the chunk holding the label line
  bool in_matrix = false;

  // Parses chunk `index` into `out`: the values of record r at out + (r - base) n.
  auto parse = [&](Chunk& c, std::size_t index, float* out, std::int64_t base) {
    std::int64_t record = c.first_record;
    for_each_line(c, [&](const char* b, const char* e, std::int64_t local_line) {
      if (b == e) return true;
      const std::int64_t line = c.first_line + local_line - 1;
      const char* q = b;
      if (index == label_chunk && local_line == c.label_line) {
        std::vector<std::string> fields;
        std::vector<std::int64_t> columns;
        split_fields_at(std::string_view(b, static_cast<std::size_t>(e - b)), delim, fields,
                        columns);
        if (static_cast<std::int64_t>(fields.size()) != n_fields) {
          fail(c.failure, line, e - b + 1,
               "the label line has " + std::to_string(fields.size()) + " fields, the header has " +
                   std::to_string(n_fields),
               "give one label per sample");
          return false;
        }
        t.labels.clear();
        for (std::size_t i = 1; i < fields.size(); ++i) {
          if (info_of[i] >= 0) continue;  // the label line's field under a text column
          std::size_t at = 0;
          if (const char* problem = name_problem(fields[i], at)) {
            fail(c.failure, line, columns[i], "label " + in_quotes(fields[i]) + " " + problem, kNameHint);
            return false;
          }
          // A missing label is no label: the sample is left out of scoring.
          t.labels.push_back(na.contains(fields[i]) ? std::string() : std::move(fields[i]));
        }
        return true;
      }
      std::string& name = t.feature_names[static_cast<std::size_t>(record)];
      read_text_field(q, e, delim, name);
      std::size_t at = 0;
      if (const char* problem = name_problem(name, at)) {
        fail(c.failure, line, 1, "feature name " + in_quotes(name) + " " + problem, kNameHint);
        return false;
      }
      float* column = out + (record - base) * n;
      for (std::int64_t j = 1, i = 0; j < n_fields; ++j) {
        if (q >= e) {
          fail(c.failure, line, q - b + 1,
               "line has " + std::to_string(j) + " fields, the header has " +
                   std::to_string(n_fields),
               "every line needs one value per sample in the header");
          return false;
        }
        ++q;
        const char* cell = q;
        if (has_info && info_of[static_cast<std::size_t>(j)] >= 0) {
          std::string& text =
              t.feature_info[static_cast<std::size_t>(info_of[static_cast<std::size_t>(j)])][static_cast<std::size_t>(record)];
          read_text_field(q, e, delim, text);
          if (const char* problem = name_problem(text, at)) {
            fail(c.failure, line, cell - b + 1,
                 "value " + in_quotes(text) + " in column " + in_quotes(h.fields[static_cast<std::size_t>(j)]) + " " +
                     problem,
                 kNameHint);
            return false;
          }
          continue;
        }
        const CellStatus s = parse_cell(q, e, ctx, column[i++]);
        if (s != CellStatus::kOk) {
          fail_cell(c.failure, s, line, b, e, cell, q, name, na, h.fields[static_cast<std::size_t>(j)],
                    Layout::kRowsAreFeatures, delim, record == 0);
          return false;
        }
      }
      if (q < e) {
        fail(c.failure, line, q - b + 1,
             "line has more fields than the header's " + std::to_string(n_fields),
             "every line needs one value per sample in the header");
        return false;
      }
      ++record;
      return true;
    });
    if (in_matrix && c.records > 0)
      internal::release_column_span(t.values, c.first_record, c.first_record + c.records - 1);
    input.release(c.begin, c.end, true);
    progress.add(c.end - c.begin);
  };

  // A gzip file is parsed as it is inflated: whole chunks, one after another, each into its own
  // buffer (the number of features, and so the matrix, is known only at the end). A chunk that
  // holds a second label line is left for the checks below.
  std::vector<Chunk> chunks;
  std::vector<std::vector<float>> early;  // values of chunk k, parsed while the text arrived
  const char* rest = arrive_in_chunks(input, h, 0, options.label_column, delim, chunks, [&](Chunk& c) {
    const std::size_t index = chunks.size() - 1;
    if (c.label_line != 0) {
      if (label_chunk != static_cast<std::size_t>(-1) || c.second_label_line != 0) return false;
      label_chunk = index;
    }
    grow_features(c.first_record + c.records);
    early.emplace_back(static_cast<std::size_t>(c.records * n));
    parse(c, index, early.back().data(), c.first_record);
    return !c.failure.set;
  });

  const std::string_view text = input.view();
  const char* end = text.data() + text.size();
  const auto first_late = chunks.size();
  const std::vector<Chunk> late = cut_chunks(rest, end);
  chunks.insert(chunks.end(), late.begin(), late.end());
  count_records(std::span<Chunk>(chunks).subspan(first_late), options.label_column, delim, threads, input);
  const std::int64_t p = number_chunks(chunks, h.first_data_line);
  std::int64_t label_line = 0;
  for (std::size_t k = 0; k < chunks.size(); ++k) {
    const Chunk& c = chunks[k];
    if (c.label_line == 0) continue;
    if (c.second_label_line != 0 && label_line == 0)
      throw_input_error({path, c.first_line + c.second_label_line - 1, 1},
                        "a second line of labels named " + in_quotes(options.label_column),
                        "first seen on line " + std::to_string(c.first_line + c.label_line - 1));
    if (label_line != 0)
      throw_input_error({path, c.first_line + c.label_line - 1, 1},
                        "a second line of labels named " + in_quotes(options.label_column),
                        "first seen on line " + std::to_string(label_line));
    label_line = c.first_line + c.label_line - 1;
    label_chunk = k;
  }
  if (label_line == 0) t.label_name.clear();  // (an optional label line that is not there)
  if (!options.label_column.empty() && label_line == 0 && !options.label_optional)
    throw_input_error({path}, "no line starts with " + in_quotes(options.label_column) + " for --label",
                      "with --layout rows=features the labels are a line whose first field is "
                      "that name");
  if (p == 0)
    throw_input_error({path, h.first_data_line, 1}, "no data lines after the header",
                      "each feature needs a line of values");
  if (any_failure(chunks)) rethrow_first(path, chunks);

  t.values.allocate(n, p, options.memory);
  grow_features(p);
  float* const out = t.values.data();
  in_matrix = true;
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads)
  for (std::size_t k = 0; k < early.size(); ++k) {
    std::copy(early[k].begin(), early[k].end(), out + chunks[k].first_record * n);
    std::vector<float>().swap(early[k]);
  }

#pragma omp parallel for schedule(dynamic, 1) num_threads(threads)
  for (std::int64_t ci = static_cast<std::int64_t>(first_late); ci < static_cast<std::int64_t>(chunks.size()); ++ci)
    parse(chunks[static_cast<std::size_t>(ci)], static_cast<std::size_t>(ci), out, 0);
  if (any_failure(chunks)) rethrow_first(path, chunks);
  return t;
}

// The checks of --feature-info / --sample-info that need no file: the layout that takes each, no
// name twice, no empty name, not the label column.
void check_info_options(const ReadOptions& options) {
  const bool by_sample = options.layout == Layout::kRowsAreSamples;
  if (by_sample && !options.feature_info.empty())
    throw_usage_error("--feature-info is for --layout rows=features (a feature per line)",
                      "with rows=samples, text columns describing the samples are --sample-info COLUMNS");
  if (!by_sample && !options.sample_info.empty())
    throw_usage_error("--sample-info is for --layout rows=samples (a sample per line)",
                      "with rows=features, text columns describing the features are --feature-info COLUMNS");
  const char* option = by_sample ? "--sample-info" : "--feature-info";
  const std::vector<std::string>& names = by_sample ? options.sample_info : options.feature_info;
  for (std::size_t i = 0; i < names.size(); ++i) {
    if (names[i].empty())
      throw_usage_error(std::string(option) + " has an empty column name", "give comma-separated header names");
    if (std::find(names.begin(), names.begin() + static_cast<std::ptrdiff_t>(i), names[i]) !=
        names.begin() + static_cast<std::ptrdiff_t>(i))
      throw_usage_error(std::string(option) + " names " + in_quotes(names[i]) + " twice", "give each column once");
    if (by_sample && names[i] == options.label_column)
      throw_usage_error(std::string(option) + " names " + in_quotes(names[i]) + ", the --label column",
                        "the labels are carried already; leave it out of --sample-info");
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
