// A table's text cut into chunks of whole lines, and the lines of each chunk: the first stage of
// the table readers (src/io.cpp), shared by both layouts. Private to the library.
#pragma once

#include <algorithm>    // std::max, std::min
#include <cstddef>      // std::size_t
#include <cstdint>      // std::int64_t
#include <cstring>      // std::memchr, std::memmove, memrchr
#include <span>         // std::span
#include <string>       // std::string
#include <string_view>  // std::string_view
#include <vector>       // std::vector

#include <omp.h>

#include "pare/error.h"

#include "internal/input_text.h"
#include "internal/io_cells.h"
#include "internal/text_fields.h"

namespace pare::internal {

// Chunks are cut by size, not by thread count, so which lines a chunk holds never depends on
// --threads; each line writes only its own row (or column), so the result cannot either.
constexpr std::size_t kChunkBytes = std::size_t{4} << 20;

// A piece of the text of whole lines, and what the passes over it learn.
struct Chunk {
  const char* begin = nullptr;
  const char* end = nullptr;
  std::int64_t lines = 0;              // line breaks (= lines) in the chunk
  std::int64_t records = 0;            // non-blank lines that are data records
  std::int64_t label_line = 0;         // 1-based line within the chunk of the label row, 0 if none
  std::int64_t second_label_line = 0;  // another label row in the same chunk, 0 if none
  std::int64_t first_line = 0;         // 1-based file line of the chunk's first line
  std::int64_t first_record = 0;
  Failure failure;
};

// `min_bytes` raises the chunk size for very long lines, so that a chunk holds enough lines for the
// row blocks of rows=samples to fill (it depends on the header only, never on --threads).
// With `arriving`, the text past `end` is still to come: only chunks of full size that end at a
// line end are cut, and the rest is left for later.
inline std::vector<Chunk> cut_chunks(const char* begin, const char* end, std::size_t min_bytes = 0,
                                     bool arriving = false) {
  const std::size_t chunk_bytes = std::max(kChunkBytes, min_bytes);
  std::vector<Chunk> chunks;
  const char* p = begin;
  while (p < end) {
    if (arriving && static_cast<std::size_t>(end - p) <= chunk_bytes) break;
    const char* stop = p + std::min<std::size_t>(chunk_bytes, static_cast<std::size_t>(end - p));
    if (stop < end) {
      const char* nl =
          static_cast<const char*>(std::memchr(stop, '\n', static_cast<std::size_t>(end - stop)));
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

// A chunk of a file's text is read into a buffer in windows of whole lines, this long unless a
// line is longer (see InputText::readable_at).
constexpr std::size_t kWindowBytes = std::size_t{1} << 20;

// Calls fn(line_begin, line_end, line_number_within_chunk) for each line of the chunk, the '\r'
// of a CRLF line break removed, until fn returns false. The lines of a file's text are read into
// `buffer`, so the pointers fn gets are valid only during the call; a file that cannot be read
// (it shrank, or the device failed) becomes the chunk's failure (this runs on OpenMP threads,
// where an exception must not escape).
template <typename Fn>
void for_each_line(const InputText& input, Chunk& chunk, std::vector<char>& buffer, Fn&& fn) {
  std::int64_t line = 0;
  // The lines of [p, end), which ends at a line end or at the chunk's end; false when fn stops.
  auto lines = [&](const char* p, const char* end) {
    while (p < end) {
      const char* nl =
          static_cast<const char*>(std::memchr(p, '\n', static_cast<std::size_t>(end - p)));
      const char* e = nl ? nl : end;
      ++line;
      const char* le = (e > p && e[-1] == '\r') ? e - 1 : e;
      if (!fn(p, le, line)) return false;
      p = nl ? nl + 1 : end;
    }
    return true;
  };
  if (!input.readable_at()) {
    lines(chunk.begin, chunk.end);
    return;
  }
  const auto total = static_cast<std::size_t>(chunk.end - chunk.begin);
  if (buffer.size() < kWindowBytes) buffer.resize(kWindowBytes);
  std::size_t done = 0, have = 0;  // bytes of the chunk handed out; bytes in the buffer after them
  while (done < total) {
    const std::size_t more = std::min(buffer.size() - have, total - done - have);
    try {
      input.read_at(chunk.begin + done + have, more, buffer.data() + have);
    } catch (const Error& e) {
      fail(chunk.failure, 0, 0, e.what());
      return;
    }
    have += more;
    const char* const b = buffer.data();
    const char* stop = b + have;  // the end of the whole lines in the buffer
    if (done + have < total) {
      const void* nl = ::memrchr(b, '\n', have);
      if (!nl) {  // a line longer than the buffer
        buffer.resize(2 * buffer.size());
        continue;
      }
      stop = static_cast<const char*>(nl) + 1;
    }
    if (!lines(b, stop)) return;
    const auto used = static_cast<std::size_t>(stop - b);
    std::memmove(buffer.data(), buffer.data() + used, have - used);
    done += used;
    have -= used;
  }
}

// True when the line's first field is `name` (plain or quoted) followed by the delimiter.
inline bool starts_with_field(const char* b, const char* e, std::string_view name, char delim) {
  const char* p = b;
  std::string field;
  read_text_field(p, e, delim, field);
  return field == name;
}

// First pass over the chunks: count lines and records, find the label row (rows=features).
// `windows` holds a buffer for each of the `threads` (see for_each_line).
inline void count_records(std::span<Chunk> chunks, const std::string& label_row, char delim,
                          int threads, const InputText& input,
                          std::vector<std::vector<char>>& windows) {
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads)
  for (std::int64_t i = 0; i < static_cast<std::int64_t>(chunks.size()); ++i) {
    Chunk& c = chunks[static_cast<std::size_t>(i)];
    std::vector<char>& window = windows[static_cast<std::size_t>(omp_get_thread_num())];
    for_each_line(input, c, window, [&](const char* b, const char* e, std::int64_t line) {
      c.lines = line;
      if (b == e) return true;
      if (!label_row.empty() && starts_with_field(b, e, label_row, delim)) {
        if (c.label_line == 0) {
          c.label_line = line;
          return true;
        }
        if (c.second_label_line == 0)
          c.second_label_line = line;  // reported once lines are numbered
        return true;
      }
      ++c.records;
      return true;
    });
    input.release(c.begin, c.end, false);
  }
}

inline std::int64_t number_chunks(std::vector<Chunk>& chunks, std::int64_t first_line) {
  std::int64_t line = first_line, record = 0;
  for (auto& c : chunks) {
    c.first_line = line;
    c.first_record = record;
    line += c.lines;
    record += c.records;
  }
  return record;
}

[[noreturn]] inline void rethrow_first(const std::string& path, const std::vector<Chunk>& chunks) {
  for (const auto& c : chunks)
    if (c.failure.set)
      throw_input_error({path, c.failure.line, c.failure.column}, c.failure.what, c.failure.hint);
  throw Error(ErrorKind::kOther, "internal: rethrow_first without a failure");
}

inline bool any_failure(const std::vector<Chunk>& chunks) {
  for (const auto& c : chunks)
    if (c.failure.set) return true;
  return false;
}

}  // namespace pare::internal
