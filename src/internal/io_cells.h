// Parsing the numeric cells of a table, and the messages for cells that are not numbers. The
// parsing is inline: it is the inner loop of the table readers (src/io.cpp). Private to the library.
#pragma once

#include <fast_float/fast_float.h>

#include <bit>          // std::countr_zero, std::endian
#include <cmath>        // std::isinf, std::isnan
#include <cstdint>      // std::uint32_t
#include <cstring>      // std::memchr, std::memcpy
#include <limits>       // std::numeric_limits
#include <string>       // std::string
#include <string_view>  // std::string_view

#if defined(__SSE2__)
#include <emmintrin.h>  // _mm_cmpeq_epi8, _mm_movemask_epi8
#endif

#include "internal/text_fields.h"
#include "pare/io.h"

namespace pare::internal {

constexpr float kMissing = std::numeric_limits<float>::quiet_NaN();

struct Failure {
  bool set = false;
  std::int64_t line = 0;
  std::int64_t column = 0;
  std::string what;
  std::string hint;
};

inline void fail(Failure& f, std::int64_t line, std::int64_t column, std::string what,
          std::string hint = {}) {
  if (f.set) return;
  f = Failure{true, line, column, std::move(what), std::move(hint)};
}

enum class CellStatus { kOk, kNotNumber, kInfinite, kOutOfRange };

struct CellContext {
  char delim;
  const NaTokens* na;
  bool allow_inf;
};

inline bool parse_whole(const char* b, const char* e, float& value) {
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
// numbers accurately", PLDI 1990; common practice in number parsers). Returns where the number
// ends (the caller checks that the field ends there), or nullptr for anything else (more digits,
// an exponent, a leading '.', a trailing '.'), which is left to fast_float. tests/io_test.cpp
// checks it against fast_float.
inline const char* plain_decimal_end(const char* p, const char* e, float& value) {
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
      if (whole == 0 || whole == 8) return nullptr;
      s += whole;
      m = digits_value(word, static_cast<int>(whole));
      if (*s == '.') {
        std::memcpy(&word, s + 1, sizeof word);
        fraction = leading_digits(word);
        if (fraction == 0 || fraction == 8 || whole + fraction > 9) return nullptr;
        m = m * kPow10Int[fraction] + digits_value(word, static_cast<int>(fraction));
        s += 1 + fraction;
      }
      if (m > (std::uint32_t{1} << 24)) return nullptr;
      const float v = static_cast<float>(m) / kPow10[fraction];
      value = negative ? -v : v;
      return s;
    }
  }
  const char* const digits = s;
  while (s < e && static_cast<unsigned char>(*s - '0') < 10 && s - digits < 10) m = 10 * m + static_cast<std::uint32_t>(*s++ - '0');
  whole = s - digits;
  if (whole > 0 && s < e && *s == '.') {
    const char* const f = ++s;
    while (s < e && static_cast<unsigned char>(*s - '0') < 10 && whole + (s - f) < 10) m = 10 * m + static_cast<std::uint32_t>(*s++ - '0');
    fraction = s - f;
    if (fraction == 0) return nullptr;
  }
  if (whole == 0 || whole + fraction > 9 || m > (std::uint32_t{1} << 24)) return nullptr;
  const float v = static_cast<float>(m) / kPow10[fraction];
  value = negative ? -v : v;
  return s;
}

// The plain decimal at `p` (see plain_decimal_end) when its field ends with it: then `p` moves to
// the delimiter (or the line end `e`).
inline bool parse_plain_decimal(const char*& p, const char* e, char delim, float& value) {
  const char* s = plain_decimal_end(p, e, value);
  if (!s || (s < e && *s != delim)) return false;
  p = s;
  return true;
}

// The delimiters of one line, found 64 bytes at a time (a bit per byte), so that where a field
// ends is known before its value is read: reading one value then does not wait on reading the
// one before it, and the processor overlaps them (the idea of the structural index of simdjson,
// Langdale and Lemire, "Parsing gigabytes of JSON per second", VLDB Journal 2019).
class DelimiterScan {
 public:
  DelimiterScan(const char* line_begin, const char* line_end, char delim) : e_(line_end), delim_(delim) {
    load(line_begin);
  }

  // The first delimiter at or after `q` (inside the line, or at its end), or the line end.
  const char* next(const char* q) {
    if (q < block_ || q - block_ >= 64) load(q);
    std::uint64_t m = mask_ & (~std::uint64_t{0} << (q - block_));
    while (m == 0) {
      if (e_ - block_ <= 64) return e_;
      load(block_ + 64);
      m = mask_;
    }
    return block_ + std::countr_zero(m);
  }

 private:
  void load(const char* at) {
    block_ = at;
    const std::ptrdiff_t n = e_ - at;
    if (n >= 64) {
      mask_ = equal_bits(at);
      return;
    }
    char tail[64] = {};
    if (n > 0) std::memcpy(tail, at, static_cast<std::size_t>(n));
    mask_ = n > 0 ? equal_bits(tail) & ((std::uint64_t{1} << n) - 1) : 0;
  }

  // Bit i set when at[i] is the delimiter, for the 64 bytes at `at`.
  std::uint64_t equal_bits(const char* at) const {
#if defined(__SSE2__)
    const __m128i d = _mm_set1_epi8(delim_);
    std::uint64_t bits = 0;
    for (int i = 0; i < 4; ++i) {
      const __m128i bytes = _mm_loadu_si128(reinterpret_cast<const __m128i*>(at + 16 * i));
      bits |= static_cast<std::uint64_t>(static_cast<std::uint32_t>(_mm_movemask_epi8(_mm_cmpeq_epi8(bytes, d))))
              << (16 * i);
    }
    return bits;
#else
    std::uint64_t bits = 0;
    for (int i = 0; i < 64; ++i) bits |= static_cast<std::uint64_t>(at[i] == delim_) << i;
    return bits;
#endif
  }

  const char* e_;
  char delim_;
  const char* block_ = nullptr;
  std::uint64_t mask_ = 0;
};

// Parses one numeric cell at `p` on a line ending at `e`. Leaves `p` at the delimiter or `e`.
// The fast path is one fast_float call; everything unusual (missing tokens, quotes, spaces, '+',
// inf) goes through the slow path.
inline CellStatus parse_cell(const char*& p, const char* e, const CellContext& ctx, float& value) {
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

// Defined in src/io_cells.cpp.
std::string cell_text(const char* begin, const char* end);
bool is_text_cell(const char* begin, const char* end);
bool mostly_text_line(const char* line_begin, const char* line_end, char delim);
void fail_cell(Failure& f, CellStatus status, std::int64_t line, const char* line_begin, const char* line_end,
               const char* begin, const char* end, const std::string& column_name, const NaTokens& na,
               const std::string& header_name, Layout layout, char delim, bool first_record);

}  // namespace pare::internal
