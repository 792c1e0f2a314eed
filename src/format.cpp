#include "internal/format.h"

#include <atomic>  // std::atomic

#include <charconv>  // std::to_chars
#include <cmath>     // std::isnan
#include <bit>       // std::countl_zero, std::countr_zero, std::endian
#include <cstdint>   // std::uint32_t, std::uint64_t
#include <cstring>   // std::memcpy, std::memmove, std::memset

namespace pare::internal {

namespace {

template <typename T>
void append_shortest(std::string& out, T value) {
  if (std::isnan(value)) {
    out += "NA";
    return;
  }
  char buffer[64];
  const auto result = std::to_chars(buffer, buffer + sizeof buffer, value);
  out.append(buffer, result.ptr);
}

}  // namespace

namespace {

// Shortest float32 text, written here rather than by std::to_chars: reduced.csv is tens to
// hundreds of millions of floats, and this takes about half the time of libstdc++'s
// general-purpose path (performance.md; digits written 8 at a time, no loop over them, the common
// forms with selects). The output is byte for byte what std::to_chars(first, last,
// float) writes (tests/format_test.cpp compares the two on every float when asked, and on about
// four million, every exponent's edges included, otherwise).
//
// The digits come from the Schubfach method (R. Giulietti, "The Schubfach way to render doubles",
// 2020; the float case as recalled, not looked up): with v = c 2^q and k = floor(log10 2^q), the
// products of 4c - 2 (or 4c - 1), 4c and 4c + 2 with 10^-k, rounded to odd from a 64-bit
// approximation g of 10^-k, give the ends of the rounding interval and v at the scale 10^k.
// Then either one of the two multiples of 10^(k+1) nearest v is inside the interval (one digit
// fewer), or one of the two multiples of 10^k is, or both are and the nearer to v wins (ties to
// even). g = floor(10^e 2^(63 - floor(log2 10^e))) + 1 for e = -31..45, computed exactly with
// Python integers.
constexpr int kMinPow10 = -31;
constexpr std::uint64_t kPow10[] = {
    0x81CEB32C4B43FCF5, 0xA2425FF75E14FC32, 0xCAD2F7F5359A3B3F,
    0xFD87B5F28300CA0E, 0x9E74D1B791E07E49, 0xC612062576589DDB,
    0xF79687AED3EEC552, 0x9ABE14CD44753B53, 0xC16D9A0095928A28,
    0xF1C90080BAF72CB2, 0x971DA05074DA7BEF, 0xBCE5086492111AEB,
    0xEC1E4A7DB69561A6, 0x9392EE8E921D5D08, 0xB877AA3236A4B44A,
    0xE69594BEC44DE15C, 0x901D7CF73AB0ACDA, 0xB424DC35095CD810,
    0xE12E13424BB40E14, 0x8CBCCC096F5088CC, 0xAFEBFF0BCB24AAFF,
    0xDBE6FECEBDEDD5BF, 0x89705F4136B4A598, 0xABCC77118461CEFD,
    0xD6BF94D5E57A42BD, 0x8637BD05AF6C69B6, 0xA7C5AC471B478424,
    0xD1B71758E219652C, 0x83126E978D4FDF3C, 0xA3D70A3D70A3D70B,
    0xCCCCCCCCCCCCCCCD, 0x8000000000000001, 0xA000000000000001,
    0xC800000000000001, 0xFA00000000000001, 0x9C40000000000001,
    0xC350000000000001, 0xF424000000000001, 0x9896800000000001,
    0xBEBC200000000001, 0xEE6B280000000001, 0x9502F90000000001,
    0xBA43B74000000001, 0xE8D4A51000000001, 0x9184E72A00000001,
    0xB5E620F480000001, 0xE35FA931A0000001, 0x8E1BC9BF04000001,
    0xB1A2BC2EC5000001, 0xDE0B6B3A76400001, 0x8AC7230489E80001,
    0xAD78EBC5AC620001, 0xD8D726B7177A8001, 0x878678326EAC9001,
    0xA968163F0A57B401, 0xD3C21BCECCEDA101, 0x84595161401484A1,
    0xA56FA5B99019A5C9, 0xCECB8F27F4200F3B, 0x813F3978F8940985,
    0xA18F07D736B90BE6, 0xC9F2C9CD04674EDF, 0xFC6F7C4045812297,
    0x9DC5ADA82B70B59E, 0xC5371912364CE306, 0xF684DF56C3E01BC7,
    0x9A130B963A6C115D, 0xC097CE7BC90715B4, 0xF0BDC21ABB48DB21,
    0x96769950B50D88F5, 0xBC143FA4E250EB32, 0xEB194F8E1AE525FE,
    0x92EFD1B8D0CF37BF, 0xB7ABC627050305AE, 0xE596B7B0C643C71A,
    0x8F7E32CE7BEA5C70, 0xB35DBF821AE4F38C,
};

int floor_log2_pow10(int e) { return (e * 1741647) >> 19; }  // floor(e log2 10) for |e| <= 1700
int floor_log10_pow2(int e) { return (e * 1262611) >> 22; }  // floor(e log10 2) for |e| <= 1700
// floor(log10(3/4 2^e))
int floor_log10_three_quarters_pow2(int e) { return (e * 1262611 - 524031) >> 22; }

// Bits 64 to 95 of g x cp, with the bits below folded into the lowest bit (rounded to odd).
std::uint32_t round_to_odd(std::uint64_t g, std::uint32_t cp) {
  // g cp = (g_hi 2^32 + g_lo) cp; `upper` is bits 32 to 95 of it.
  const std::uint64_t upper = (g >> 32) * cp + (((g & 0xFFFFFFFFu) * cp) >> 32);
  const auto high = static_cast<std::uint32_t>(upper >> 32);
  const auto middle = static_cast<std::uint32_t>(upper);
  return high | static_cast<std::uint32_t>(middle > 1);
}

struct Decimal {
  std::uint32_t digits;  // below 10^9, maybe with trailing zeros
  int exponent;          // value = digits x 10^exponent
};

// The shortest decimal that reads back as the positive finite float c 2^q (the fields decoded
// by write_shortest; `lower_closer` when c is a power of two above the smallest normal, so the
// float below is half as far as the one above).
Decimal shortest_decimal(std::uint32_t c, int q, bool lower_closer) {
  Decimal d{};
  if (q <= 0 && q > -24 && (c & ((std::uint32_t{1} << -q) - 1)) == 0) {
    d = {c >> -q, 0};  // an integer below 2^24: itself
  } else {
    const bool even = (c & 1) == 0;
    const std::uint32_t cbl = 4 * c - 2 + static_cast<std::uint32_t>(lower_closer), cb = 4 * c, cbr = 4 * c + 2;
    const int k = lower_closer ? floor_log10_three_quarters_pow2(q) : floor_log10_pow2(q);
    const int h = q + floor_log2_pow10(-k) + 1;  // 1 to 4
    const std::uint64_t g = kPow10[-k - kMinPow10];
    const std::uint32_t vbl = round_to_odd(g, cbl << h), vb = round_to_odd(g, cb << h),
                        vbr = round_to_odd(g, cbr << h);
    const std::uint32_t lower = vbl + static_cast<std::uint32_t>(!even), upper = vbr - static_cast<std::uint32_t>(!even);
    const std::uint32_t s = vb / 4;
    const std::uint32_t sp = s / 10;
    const bool up_inside = lower <= 40 * sp, wp_inside = 40 * sp + 40 <= upper;
    const bool u_inside = lower <= 4 * s, w_inside = 4 * s + 4 <= upper;
    if (s >= 10 && up_inside != wp_inside) {
      d = {sp + static_cast<std::uint32_t>(wp_inside), k + 1};
    } else if (u_inside != w_inside) {
      d = {s + static_cast<std::uint32_t>(w_inside), k};
    } else {
      const std::uint32_t mid = 4 * s + 2;
      const bool up = vb > mid || (vb == mid && (s & 1) != 0);
      d = {s + static_cast<std::uint32_t>(up), k};
    }
  }
  return d;
}

constexpr char kTwoDigits[] =
    "00010203040506070809101112131415161718192021222324252627282930313233343536373839"
    "40414243444546474849505152535455565758596061626364656667686970717273747576777879"
    "8081828384858687888990919293949596979899";

int digit_count(std::uint64_t v) {
  int n = 1;
  for (std::uint64_t bound = 10; n < 20 && v >= bound; bound *= 10) ++n;
  return n;
}

// Writes the `count` digits of v ending just before `end`.
void write_digits(char* end, std::uint64_t v, int count) {
  while (count >= 2) {
    end -= 2;
    std::memcpy(end, kTwoDigits + 2 * (v % 100), 2);
    v /= 100;
    count -= 2;
  }
  if (count == 1) *--end = static_cast<char>('0' + v);
}


// The scientific form d[.ddd]e+XX of digits x 10^e, its n digits already written at p + 1: the
// first digit moves in front of the point.
char* finish_scientific(char* p, int n, int e) {
  p[0] = p[1];
  char* at = p + 1;
  if (n > 1) {
    *at = '.';
    at = p + n + 1;
  }
  const int x = e + n - 1;
  at[0] = 'e';
  at[1] = x < 0 ? '-' : '+';
  std::memcpy(at + 2, kTwoDigits + 2 * (x < 0 ? -x : x), 2);
  return at + 4;
}

// Writes digits x 10^e as std::to_chars does, digit by digit (`c` and `q` are the float's fields,
// for integers of 2^24 or more).
char* write_decimal(char* p, std::uint32_t digits, int e, std::uint32_t c, int q) {
  while (digits % 10 == 0) {
    digits /= 10;
    ++e;
  }
  const int n = digit_count(digits);
  // std::to_chars' choice: plain (%f style) unless scientific (%e style, at least two exponent
  // digits) is shorter.
  const int scientific = n + (n > 1 ? 1 : 0) + 4;
  const int plain = e >= 0 ? n + e : (n + e > 0 ? n + 1 : 2 - e);
  if (plain <= scientific) {
    if (e >= 0) {
      if (q > 0) {
        // An integer of 2^24 or more written out in full: all its digits are printed either
        // way, and std::to_chars prints the exact value (the nearest of the same length).
        const std::uint64_t exact = std::uint64_t{c} << q;
        const int count = digit_count(exact);
        write_digits(p + count, exact, count);
        return p + count;
      }
      write_digits(p + n, digits, n);
      std::memset(p + n, '0', static_cast<std::size_t>(e));
      return p + n + e;
    }
    if (n + e > 0) {  // point inside: the integer part, then the rest
      const int whole = n + e;
      write_digits(p + n + 1, digits, n);
      std::memmove(p, p + 1, static_cast<std::size_t>(whole));
      p[whole] = '.';
      return p + n + 1;
    }
    p[0] = '0';
    p[1] = '.';
    std::memset(p + 2, '0', static_cast<std::size_t>(-e - n));
    write_digits(p + 2 - e, digits, n);
    return p + 2 - e;
  }
  // d[.ddd]e+XX
  write_digits(p + n + 1, digits, n);
  return finish_scientific(p, n, e);
}

// The 8 decimal digits of v < 10^8, one per byte, most significant in the lowest byte (text order
// on a little-endian machine), each 0 to 9: two 4-digit halves, then pairs, then digits, every
// lane divided at once by multiplying with a reciprocal (x 5243 >> 19 is x / 100 for x < 43699,
// x 103 >> 10 is x / 10 for x < 179).
std::uint64_t eight_digits(std::uint32_t v) {
  std::uint64_t x = (v / 10000) | (std::uint64_t{v % 10000} << 32);
  std::uint64_t hi = ((x * 5243) >> 19) & 0x0000007F0000007FULL;
  x = hi | ((x - 100 * hi) << 16);
  hi = ((x * 103) >> 10) & 0x000F000F000F000FULL;
  return hi | ((x - 10 * hi) << 8);
}

void store8(char* p, std::uint64_t bytes) { std::memcpy(p, &bytes, sizeof bytes); }


// The body of write_shortest, inlined into the loops below. The common cases are written with
// selects rather than branches, since neighbouring values in a data file differ in sign, size and
// length unpredictably.
inline char* shortest(char* p, float value) {
  std::uint32_t bits;
  std::memcpy(&bits, &value, sizeof bits);
  *p = '-';
  p += bits >> 31;
  const std::uint32_t biased = (bits >> 23) & 0xFF, fraction = bits & 0x7FFFFF;
  if (biased == 0xFF) [[unlikely]] {
    std::memcpy(p, fraction != 0 ? "nan" : "inf", 3);  // as std::to_chars spells them
    return p + 3;
  }
  if ((bits << 1) == 0) [[unlikely]] {
    *p = '0';
    return p + 1;
  }
  const bool normal = biased != 0;
  const std::uint32_t c = normal ? fraction | (std::uint32_t{1} << 23) : fraction;
  const int q = normal ? static_cast<int>(biased) - 150 : -149;
  Decimal d = shortest_decimal(c, q, fraction == 0 && biased > 1);
  if constexpr (std::endian::native != std::endian::little) return write_decimal(p, d.digits, d.exponent, c, q);
  if (d.digits >= 100000000) [[unlikely]] {
    if (d.digits % 10 != 0) return write_decimal(p, d.digits, d.exponent, c, q);  // 9 digits
    d.digits /= 10;
    ++d.exponent;
  }
  // The digits as text in one word: leading zero bytes (numbers under 8 digits) are dropped,
  // trailing zeros go into the exponent, and the text is stored 8 bytes at a time (room: the
  // caller gives kNumberRoom bytes; bytes past the end returned are left over).
  const std::uint64_t word = eight_digits(d.digits);
  const int lead = std::countr_zero(word) / 8, trail = std::countl_zero(word) / 8;
  const int n = 8 - lead - trail, e = d.exponent + trail;
  const std::uint64_t text = (word >> (8 * lead)) | 0x3030303030303030ULL;
  const int scientific = n + (n > 1 ? 1 : 0) + 4;
  if (e < 0 && 2 - e <= scientific) {
    // Plain with a point: the integer part (the first `whole` digits, or "0"), the point, the
    // zeros after it (for values under 0.1), the rest of the digits.
    const int whole = n + e;
    const bool has_whole = whole > 0;
    const int before = has_whole ? whole : 1, zeros = has_whole ? 0 : -whole;
    store8(p, has_whole ? text : 0x30);
    p[before] = '.';
    store8(p + before + 1, 0x3030303030303030ULL);
    store8(p + before + 1 + zeros, has_whole ? text >> (8 * whole) : text);
    return p + before + 1 + zeros + (has_whole ? n - whole : n);
  }
  if (e >= 0 && n + e <= scientific) {
    if (q > 0) return write_decimal(p, d.digits, d.exponent, c, q);  // 2^24 or more
    store8(p, text);
    store8(p + n, 0x3030303030303030ULL);
    return p + n + e;
  }
  // d[.ddd]e+XX
  store8(p + 1, text);
  return finish_scientific(p, n, e);
}

}  // namespace

char* write_shortest(char* p, float value) { return shortest(p, value); }

char* write_number(char* p, float value) {
  if (std::isnan(value)) {
    p[0] = 'N';
    p[1] = 'A';
    return p + 2;
  }
  return shortest(p, value);
}

char* write_numbers(char* p, const float* x, std::ptrdiff_t count, std::ptrdiff_t step, char delimiter) {
  for (std::ptrdiff_t i = 0; i < count; ++i) {
    *p++ = delimiter;
    const float v = x[i * step];
    if (std::isnan(v)) [[unlikely]] {
      p[0] = 'N';
      p[1] = 'A';
      p += 2;
    } else {
      p = shortest(p, v);
    }
  }
  return p;
}

void append_number(std::string& out, double value) { append_shortest(out, value); }
void append_number(std::string& out, float value) {
  char buffer[kNumberRoom];
  out.append(buffer, write_number(buffer, value));
}

void append_rounded(std::string& out, double value, int digits) {
  if (std::isnan(value)) {
    out += "NA";
    return;
  }
  char buffer[64];
  const auto result = std::to_chars(buffer, buffer + sizeof buffer, value,
                                    std::chars_format::general, digits);
  out.append(buffer, result.ptr);
}

namespace {

std::atomic<bool> formula_guard{true};

bool formula_start(char c) { return c == '=' || c == '+' || c == '-' || c == '@' || c == '\t' || c == '\r'; }

}  // namespace

bool needs_formula_guard(std::string_view field) {
  if (field.empty()) return false;
  return formula_start(field[0]) || (field[0] == '\'' && field.size() > 1 && (formula_start(field[1]) || field[1] == '\''));
}

void remove_formula_guard(std::string& field) {
  if (field.size() > 1 && field[0] == '\'' && (formula_start(field[1]) || field[1] == '\'')) field.erase(0, 1);
}

void append_field(std::string& out, std::string_view field, char delimiter) {
  std::string guarded;
  if (formula_guard.load(std::memory_order_relaxed) && needs_formula_guard(field)) {
    guarded.reserve(field.size() + 1);
    guarded += '\'';
    guarded += field;
    field = guarded;
  }
  const bool needs_quotes = field.find_first_of(std::string{delimiter} + "\"\r\n") !=
                            std::string_view::npos;
  if (!needs_quotes) {
    out += field;
    return;
  }
  out += '"';
  for (char c : field) {
    if (c == '"') out += '"';
    out += c;
  }
  out += '"';
}

}  // namespace pare::internal

namespace pare {

void set_formula_guard(bool on) { internal::formula_guard.store(on); }

}  // namespace pare
