// UTF-8 checks for names read from files, and a printable form of any bytes for messages.
#pragma once

#include <cstddef>      // std::size_t
#include <string>       // std::string
#include <string_view>  // std::string_view

namespace pare::internal {

/// Length of the valid UTF-8 sequence starting at s[i] (1-4), or 0 when the bytes there are not
/// one (overlong forms, surrogates and code points past U+10FFFF included).
inline std::size_t utf8_sequence(std::string_view s, std::size_t i) {
  const auto b = [&](std::size_t k) { return static_cast<unsigned char>(s[k]); };
  const unsigned char c = b(i);
  if (c < 0x80) return 1;
  std::size_t len = 0;
  unsigned char lo = 0x80, hi = 0xBF;
  if (c >= 0xC2 && c <= 0xDF) len = 2;
  else if (c == 0xE0) len = 3, lo = 0xA0;
  else if (c >= 0xE1 && c <= 0xEC) len = 3;
  else if (c == 0xED) len = 3, hi = 0x9F;
  else if (c >= 0xEE && c <= 0xEF) len = 3;
  else if (c == 0xF0) len = 4, lo = 0x90;
  else if (c >= 0xF1 && c <= 0xF3) len = 4;
  else if (c == 0xF4) len = 4, hi = 0x8F;
  else return 0;
  if (i + len > s.size()) return 0;
  if (b(i + 1) < lo || b(i + 1) > hi) return 0;
  for (std::size_t k = 2; k < len; ++k)
    if (b(i + k) < 0x80 || b(i + k) > 0xBF) return 0;
  return len;
}

/// Offset of the first byte that is not valid UTF-8, or npos.
inline std::size_t invalid_utf8_at(std::string_view s) {
  for (std::size_t i = 0; i < s.size();) {
    const std::size_t len = utf8_sequence(s, i);
    if (len == 0) return i;
    i += len;
  }
  return std::string_view::npos;
}

/// `s` made safe for a one-line message: line breaks, tabs and other control characters become
/// \n, \t, \xNN; bytes that are not valid UTF-8 become \xNN.
inline std::string printable(std::string_view s) {
  static const char* const kHex = "0123456789ABCDEF";
  std::string out;
  out.reserve(s.size());
  for (std::size_t i = 0; i < s.size();) {
    const auto c = static_cast<unsigned char>(s[i]);
    const std::size_t len = utf8_sequence(s, i);
    if (c == '\n') {
      out += "\\n";
    } else if (c == '\t') {
      out += "\\t";
    } else if (len == 0 || c < 0x20 || c == 0x7F) {
      out += "\\x";
      out += kHex[c >> 4];
      out += kHex[c & 15];
    } else {
      out.append(s.substr(i, len));
      i += len;
      continue;
    }
    ++i;
  }
  return out;
}

}  // namespace pare::internal
