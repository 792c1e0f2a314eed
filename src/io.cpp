#include "pare/io.h"

#include <fast_float/fast_float.h>
#include <omp.h>
#include <fcntl.h>
#include <signal.h>
#include <sys/mman.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>      // std::max, std::min, std::sort
#include <atomic>         // std::atomic
#include <bit>            // std::countr_zero, std::endian
#include <cerrno>         // errno
#include <chrono>         // std::chrono::steady_clock
#include <cmath>          // std::isinf, std::isnan
#include <cstdint>        // std::uint32_t
#include <cstdlib>        // std::strtol
#include <cstring>        // std::memchr, std::strerror
#include <filesystem>     // std::filesystem::create_directories
#include <limits>         // std::numeric_limits
#include <span>           // std::span
#include <unordered_map>  // std::unordered_map
#include <unordered_set>  // std::unordered_set

#include "internal/buffer.h"
#include "internal/format.h"
#include "internal/gzip.h"
#include "internal/omp.h"
#include "internal/spill.h"
#include "internal/utf8.h"
#include "pare/error.h"
#include "pare/progress.h"

namespace pare {

namespace {

constexpr float kMissing = std::numeric_limits<float>::quiet_NaN();
// Chunks are cut by size, not by thread count, so which lines a chunk holds never depends on
// --threads; each line writes only its own row (or column), so the result cannot either.
constexpr std::size_t kChunkBytes = std::size_t{4} << 20;
// Rows of a rows=samples chunk parsed into a small column-major buffer before they are copied out,
// so each copy writes whole cache lines of the big column-major matrix instead of one float.
constexpr std::int64_t kRowBlock = 32;

std::string in_quotes(std::string_view s) {
  std::string out = "\"";
  out.append(s.substr(0, 60));
  if (s.size() > 60) out += "...";
  out += '"';
  return out;
}

std::string_view strip_cr(std::string_view line) {
  if (!line.empty() && line.back() == '\r') line.remove_suffix(1);
  return line;
}

// Position just past the end of the record starting at `p`: the next line break outside quotes.
// Only the header is read this way; data lines end at the next line break.
const char* header_end(const char* p, const char* end) {
  bool in_quotes = false;
  for (; p < end; ++p) {
    if (*p == '"') in_quotes = !in_quotes;
    else if (*p == '\n' && !in_quotes) return p;
  }
  return end;
}

// Reads the text field at `p` (stopping at `delim` or `end`), undoing CSV quoting; leaves `p` at
// the delimiter or at `end`.
void read_text_field(const char*& p, const char* end, char delim, std::string& out) {
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

struct Failure {
  bool set = false;
  std::int64_t line = 0;
  std::int64_t column = 0;
  std::string what;
  std::string hint;
};

void fail(Failure& f, std::int64_t line, std::int64_t column, std::string what,
          std::string hint = {}) {
  if (f.set) return;
  f = Failure{true, line, column, std::move(what), std::move(hint)};
}

// Names, ids and labels end up in every output (JSON among them), so they must be text: UTF-8
// without NUL bytes. Returns what is wrong with `name` (and sets `at` to the byte), or nullptr.
const char* name_problem(std::string_view name, std::size_t& at) {
  at = name.find('\0');
  if (at != std::string_view::npos) return "holds a NUL byte";
  at = internal::invalid_utf8_at(name);
  if (at != std::string_view::npos) return "is not valid UTF-8";
  return nullptr;
}

constexpr const char* kNameHint =
    "names, ids and labels must be UTF-8 text: is it a binary file, or text in another encoding? "
    "Convert it, e.g. with iconv -f latin1 -t utf-8";

// Checks every name of a split line (header, label line); throws at the first bad one.
void check_names(const std::string& path, std::int64_t line, const std::vector<std::string>& fields,
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

enum class CellStatus { kOk, kNotNumber, kInfinite, kOutOfRange };

struct CellContext {
  char delim;
  const NaTokens* na;
  bool allow_inf;
};

bool parse_whole(const char* b, const char* e, float& value) {
  if (b < e && *b == '+') {
    ++b;
    if (b < e && *b == '-') return false;  // "+-1" is not a number
  }
  if (b == e) return false;
  const auto r = fast_float::from_chars(b, e, value);
  return r.ec == std::errc() && r.ptr == e;
}

// How many of the 8 bytes of `word` (first character in the lowest byte) are ASCII digits before
// the first that is not. A byte is a digit when its high nibble is 3 and adding 6 keeps it so (a
// carry out of a byte of 0xFA or more can only spoil the bytes after it).
inline int leading_digits(std::uint64_t word) {
  const std::uint64_t high = word & 0xF0F0F0F0F0F0F0F0ULL, shifted = (word + 0x0606060606060606ULL) & 0xF0F0F0F0F0F0F0F0ULL;
  const std::uint64_t other = (high ^ 0x3030303030303030ULL) | (shifted ^ 0x3030303030303030ULL);
  return other == 0 ? 8 : std::countr_zero(other) / 8;
}

// The value of the first `count` (1 to 8) digits of `word`, first digit in the lowest byte: the
// digits are moved to the top and the room filled with '0', then combined pairwise by multiplying
// (the method of fast_float's parse_eight_digits_unrolled, written out here).
inline std::uint32_t digits_value(std::uint64_t word, int count) {
  if (count < 8) word = (word << (8 * (8 - count))) | (0x3030303030303030ULL >> (8 * count));
  word -= 0x3030303030303030ULL;
  word = word * 10 + (word >> 8);
  word = (((word & 0x000000FF000000FFULL) * 0x000F424000000064ULL) +
          (((word >> 16) & 0x000000FF000000FFULL) * 0x0000271000000001ULL)) >> 32;
  return static_cast<std::uint32_t>(word);
}

// The common cell, a plain decimal of at most 9 digits ("-12.375", "0.227663", "574"), read
// without the general parser: its digits m and fraction length d give m / 10^d, and while
// m <= 2^24 and d <= 10 both are exact in float32, so the one IEEE division is the correctly
// rounded value (the exact-operands fast path of W. D. Clinger, "How to read floating point
// numbers accurately", PLDI 1990; common practice in number parsers). Anything else (more
// digits, an exponent, a leading '.', a trailing '.', another character before the delimiter)
// returns false and is left to fast_float. tests/io_test.cpp checks it against fast_float.
inline bool parse_plain_decimal(const char*& p, const char* e, char delim, float& value) {
  static constexpr float kPow10[] = {1e0f, 1e1f, 1e2f, 1e3f, 1e4f, 1e5f, 1e6f, 1e7f, 1e8f, 1e9f};
  static constexpr std::uint32_t kPow10Int[] = {1, 10, 100, 1000, 10000, 100000, 1000000, 10000000, 100000000};
  const char* s = p;
  const bool negative = s < e && *s == '-';
  s += negative;
  std::uint32_t m = 0;
  std::ptrdiff_t whole = 0, fraction = 0;
  if constexpr (std::endian::native == std::endian::little) {
    if (e - s >= 17) {
      // Eight bytes at a time: the integer digits, then (after a point) the fraction's.
      std::uint64_t word;
      std::memcpy(&word, s, sizeof word);
      whole = leading_digits(word);
      if (whole == 0 || whole == 8) return false;
      s += whole;
      m = digits_value(word, static_cast<int>(whole));
      if (*s == '.') {
        std::memcpy(&word, s + 1, sizeof word);
        fraction = leading_digits(word);
        if (fraction == 0 || fraction == 8 || whole + fraction > 9) return false;
        m = m * kPow10Int[fraction] + digits_value(word, static_cast<int>(fraction));
        s += 1 + fraction;
      }
      if (m > (std::uint32_t{1} << 24) || *s != delim) return false;
      const float v = static_cast<float>(m) / kPow10[fraction];
      value = negative ? -v : v;
      p = s;
      return true;
    }
  }
  const char* const digits = s;
  while (s < e && static_cast<unsigned char>(*s - '0') < 10 && s - digits < 10) m = 10 * m + static_cast<std::uint32_t>(*s++ - '0');
  whole = s - digits;
  if (whole > 0 && s < e && *s == '.') {
    const char* const f = ++s;
    while (s < e && static_cast<unsigned char>(*s - '0') < 10 && whole + (s - f) < 10) m = 10 * m + static_cast<std::uint32_t>(*s++ - '0');
    fraction = s - f;
    if (fraction == 0) return false;
  }
  if (whole == 0 || whole + fraction > 9 || m > (std::uint32_t{1} << 24) || (s < e && *s != delim)) return false;
  const float v = static_cast<float>(m) / kPow10[fraction];
  value = negative ? -v : v;
  p = s;
  return true;
}

// Parses one numeric cell at `p` on a line ending at `e`. Leaves `p` at the delimiter or `e`.
// The fast path is one fast_float call; everything unusual (missing tokens, quotes, spaces, '+',
// inf) goes through the slow path.
CellStatus parse_cell(const char*& p, const char* e, const CellContext& ctx, float& value) {
  if (!ctx.na->has_numeric() && parse_plain_decimal(p, e, ctx.delim, value)) return CellStatus::kOk;
  {
    const char* q = p;
    if (q < e && *q == '+') ++q;
    const bool two_signs = q > p && q < e && *q == '-';  // "+-1": left to the slow path to reject
    const auto r = fast_float::from_chars(q, e, value);
    if (!two_signs && r.ec == std::errc() && (r.ptr == e || *r.ptr == ctx.delim) &&
        std::isfinite(value)) {
      if (ctx.na->has_numeric() &&
          ctx.na->contains(std::string_view(p, static_cast<std::size_t>(r.ptr - p))))
        value = kMissing;
      p = r.ptr;
      return CellStatus::kOk;
    }
  }
  // Slow path: find the field's extent first.
  const char* b = p;
  const char* f = p;
  if (f < e && *f == '"') {
    ++f;
    while (f < e && *f != '"') ++f;
    if (f < e) ++f;
  }
  const char* stop = f < e ? static_cast<const char*>(std::memchr(f, ctx.delim, static_cast<std::size_t>(e - f))) : nullptr;
  if (!stop) stop = e;
  p = stop;
  const char* te = stop;
  while (b < te && (*b == ' ' || *b == '\t') && *b != ctx.delim) ++b;
  while (te > b && (te[-1] == ' ' || te[-1] == '\t') && te[-1] != ctx.delim) --te;
  if (te - b >= 2 && *b == '"' && te[-1] == '"') {
    ++b;
    --te;
  }
  const std::string_view token(b, static_cast<std::size_t>(te - b));
  if (ctx.na->contains(token)) {
    value = kMissing;
    return CellStatus::kOk;
  }
  if (!parse_whole(b, te, value) || std::isnan(value)) return CellStatus::kNotNumber;
  if (std::isinf(value)) {
    // A finite decimal beyond the float32 range (1e39) also parses as inf: not what the file says.
    const char* s = b + (*b == '+' || *b == '-');
    if (s == te || (*s != 'i' && *s != 'I')) return CellStatus::kOutOfRange;
    if (!ctx.allow_inf) return CellStatus::kInfinite;
  }
  return CellStatus::kOk;
}

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
           "pass --label " + header_name + " if it holds the classes, or --sample-info " + header_name +
               " to carry it into samples.tsv");
    } else if (mostly_text_line(line_begin, line_end, delim)) {
      fail(f, line, column,
           "line " + in_quotes(column_name) + " holds text (" + cell_text(begin, end) + " in column " +
               in_quotes(header_name) + "), not numbers",
           "pass --label " + column_name + " if it holds the classes");
    } else {
      fail(f, line, column,
           "column " + in_quotes(header_name) + " holds text (" + cell_text(begin, end) + " on line " +
               std::to_string(line) + "), not numbers",
           "pass --feature-info " + header_name +
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
         "pass --allow-inf to accept infinite values, or fix the export");
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
                       : "missing values must be one of: " + na.describe() + "; --na sets the list");
  }
}

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

namespace {

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
void split_fields_at(std::string_view line, char delimiter, std::vector<std::string>& fields,
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

// Where the text starts after a UTF-8 byte-order mark, if it has one.
const char* after_byte_order_mark(std::string_view text) {
  const bool mark = text.size() >= 3 && static_cast<unsigned char>(text[0]) == 0xEF &&
                    static_cast<unsigned char>(text[1]) == 0xBB && static_cast<unsigned char>(text[2]) == 0xBF;
  return text.data() + (mark ? 3 : 0);
}

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

SampleSheet read_sample_sheet(const std::string& spec, char delimiter) {
  SampleSheet sheet;
  sheet.path = spec;
  // FILE[:COLUMN]: a path that exists as written wins over splitting at the last colon.
  std::error_code ec;
  if (!std::filesystem::exists(spec, ec)) {
    const auto colon = spec.rfind(':');
    if (colon != std::string::npos && colon > 0) {
      sheet.path = spec.substr(0, colon);
      sheet.column = spec.substr(colon + 1);
    }
  }
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

// ---- output ----------------------------------------------------------------------------------

namespace {
std::atomic<unsigned> temp_counter{0};
}

namespace {

// Removes ".NAME.part-PID-N" files left in `folder` by runs that were killed (their process no
// longer exists), so a killed run's leftovers go with the next successful one. Parts of a run
// still alive, this one included, are left alone.
void remove_stale_parts(const std::filesystem::path& folder, const std::string& base) {
  const std::string prefix = "." + base + ".part-";
  std::error_code ec;
  for (std::filesystem::directory_iterator it(folder.empty() ? "." : folder, ec), end; !ec && it != end; it.increment(ec)) {
    const std::string name = it->path().filename().string();
    if (name.rfind(prefix, 0) != 0) continue;
    const char* digits = name.c_str() + prefix.size();
    char* stop = nullptr;
    const long pid = std::strtol(digits, &stop, 10);
    if (stop == digits || *stop != '-' || pid <= 0) continue;
    if (::kill(static_cast<pid_t>(pid), 0) == 0 || errno != ESRCH) continue;  // alive, or not ours to judge
    std::error_code ignored;
    std::filesystem::remove(it->path(), ignored);
  }
}

}  // namespace

OutputFile::OutputFile(std::string path) : path_(std::move(path)) {
  const std::filesystem::path final_path(path_);
  const std::string base = final_path.filename().string();
  remove_stale_parts(final_path.parent_path(), base);
  temp_path_ = (final_path.parent_path() /
                ("." + base + ".part-" + std::to_string(::getpid()) + "-" +
                 std::to_string(temp_counter++)))
                   .string();
  fd_ = ::open(temp_path_.c_str(), O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC, 0644);
  if (fd_ < 0)
    throw_output_error(path_, std::string("cannot create the output file: ") + std::strerror(errno),
                       "check that the folder exists and is writable");
}

namespace {

constexpr std::size_t kDirectBlock = std::size_t{4} << 20;

}  // namespace

OutputFile::~OutputFile() {
  if (stage_) ::munmap(stage_, kDirectBlock);
  if (committed_) return;
  if (fd_ >= 0) ::close(fd_);
  ::unlink(temp_path_.c_str());
}

void OutputFile::write_out(const char* data, std::size_t size) {
  while (size > 0) {
    const ssize_t put = ::write(fd_, data, size);
    if (put < 0) {
      if (errno == EINTR) continue;
      if (errno == EINVAL && stage_) {
        // The filesystem took O_DIRECT at open but not these writes: write normally instead.
        ::fcntl(fd_, F_SETFL, ::fcntl(fd_, F_GETFL) & ~O_DIRECT);
        continue;
      }
      throw_output_error(path_, std::string("cannot write: ") + std::strerror(errno),
                         "check free disk space");
    }
    data += put;
    size -= static_cast<std::size_t>(put);
  }
}

void OutputFile::write(std::string_view bytes) {
  if (!stage_) {
    write_out(bytes.data(), bytes.size());
    return;
  }
  while (!bytes.empty()) {
    const std::size_t take = std::min(bytes.size(), kDirectBlock - staged_);
    std::memcpy(stage_ + staged_, bytes.data(), take);
    staged_ += take;
    bytes.remove_prefix(take);
    if (staged_ == kDirectBlock) {
      const auto start = std::chrono::steady_clock::now();
      write_out(stage_, kDirectBlock);
      staged_ = 0;
      // A slow device (a network share, a disk) would now hold up the run, where the page cache
      // would have absorbed the writes: averaging under 250 MB/s over 4 blocks or more, go back
      // to writing through it.
      direct_seconds_ += std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
      ++direct_blocks_;
      if (direct_blocks_ >= 4 && direct_seconds_ > 0.016 * direct_blocks_) {
        ::fcntl(fd_, F_SETFL, ::fcntl(fd_, F_GETFL) & ~O_DIRECT);
        ::munmap(stage_, kDirectBlock);
        stage_ = nullptr;
        write_out(bytes.data(), bytes.size());
        return;
      }
    }
  }
}

void OutputFile::write_direct() {
  if (stage_ || fd_ < 0) return;
  // Whole blocks from an aligned buffer at aligned offsets: what was written so far is flushed
  // normally first only if it left the offset unaligned.
  const off_t at = ::lseek(fd_, 0, SEEK_CUR);
  if (at < 0 || at % 4096 != 0) return;
  const int flags = ::fcntl(fd_, F_GETFL);
  if (flags < 0 || ::fcntl(fd_, F_SETFL, flags | O_DIRECT) != 0) return;
  void* p = ::mmap(nullptr, kDirectBlock, PROT_READ | PROT_WRITE, MAP_PRIVATE | MAP_ANONYMOUS, -1, 0);
  if (p == MAP_FAILED) {
    ::fcntl(fd_, F_SETFL, flags);
    return;
  }
  stage_ = static_cast<char*>(p);
}

void OutputFile::write_gzip(std::string_view bytes, int level) { write(internal::gzip(bytes, level)); }

void OutputFile::commit() {
  if (stage_ && staged_ > 0) {
    // The tail is not a whole block: written through the page cache.
    ::fcntl(fd_, F_SETFL, ::fcntl(fd_, F_GETFL) & ~O_DIRECT);
    write_out(stage_, staged_);
    staged_ = 0;
  }
  if (::close(fd_) != 0) {
    fd_ = -1;
    throw_output_error(path_, std::string("cannot finish writing: ") + std::strerror(errno));
  }
  fd_ = -1;
  if (::rename(temp_path_.c_str(), path_.c_str()) != 0)
    throw_output_error(path_, std::string("cannot move the finished file into place: ") +
                                  std::strerror(errno));
  committed_ = true;
}

void write_file_atomically(const std::string& path, std::string_view content) {
  OutputFile f(path);
  f.write(content);
  f.commit();
}

void ensure_directory(const std::string& path) {
  std::error_code ec;
  std::filesystem::create_directories(path, ec);
  if (ec) throw_output_error(path, "cannot create the output folder: " + ec.message());
  if (!std::filesystem::is_directory(path, ec))
    throw_output_error(path, "is not a folder", "choose another --out");
}

}  // namespace pare
