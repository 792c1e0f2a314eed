// report.html's text and number formatting: clean UTF-8, HTML escapes, counts, significant
// digits, SVG coordinates, the shortest round-trip numbers and shell-quoted words.
#include <charconv>     // std::to_chars
#include <cstdio>       // std::snprintf
#include <string_view>  // std::string_view

#include "internal/format.h"
#include "internal/report_html.h"

namespace pare {

// The helpers are shared with src/report_plots.cpp (declared in internal/report_html.h, where
// the palette is).
namespace internal::html {

// ---- text
// -----------------------------------------------------------------------------------------

// Valid UTF-8 with nothing an HTML parser reports as an error: invalid bytes, C0 and C1 controls
// (tab and line feed excepted) and non-characters become U+FFFD. Names come from data files and
// may hold anything.
std::string clean(std::string_view s) {
  static constexpr std::string_view kReplacement = "\xEF\xBF\xBD";
  std::string out;
  out.reserve(s.size());
  std::size_t i = 0;
  while (i < s.size()) {
    const auto b = static_cast<unsigned char>(s[i]);
    std::size_t len = 0;
    char32_t cp = 0;
    if (b < 0x80) {
      len = 1;
      cp = b;
    } else if (b >= 0xC2 && b <= 0xDF) {
      len = 2;
      cp = b & 0x1Fu;
    } else if (b >= 0xE0 && b <= 0xEF) {
      len = 3;
      cp = b & 0x0Fu;
    } else if (b >= 0xF0 && b <= 0xF4) {
      len = 4;
      cp = b & 0x07u;
    }
    bool ok = len > 0 && i + len <= s.size();
    for (std::size_t k = 1; ok && k < len; ++k) {
      const auto c = static_cast<unsigned char>(s[i + k]);
      if ((c & 0xC0u) != 0x80u) ok = false;
      cp = (cp << 6) | (c & 0x3Fu);
    }
    // Overlong forms, surrogates and values past U+10FFFF are not UTF-8.
    if (ok && ((len == 3 && cp < 0x800) || (len == 4 && (cp < 0x10000 || cp > 0x10FFFF)) ||
               (cp >= 0xD800 && cp <= 0xDFFF)))
      ok = false;
    if (!ok) {
      out += kReplacement;
      ++i;
      continue;
    }
    const bool control = (cp < 0x20 && cp != '\t' && cp != '\n') || (cp >= 0x7F && cp <= 0x9F);
    const bool nonchar = (cp >= 0xFDD0 && cp <= 0xFDEF) || (cp & 0xFFFEu) == 0xFFFEu;
    if (control || nonchar)
      out += kReplacement;
    else
      out.append(s.substr(i, len));
    i += len;
  }
  return out;
}

// `s` (clean UTF-8) cut to at most `max` code points, the last one an ellipsis when cut.
std::string shorten(const std::string& s, std::size_t max) {
  std::size_t count = 0, i = 0, cut = std::string::npos;
  while (i < s.size()) {
    if (count == max - 1) cut = i;
    ++count;
    const auto b = static_cast<unsigned char>(s[i]);
    i += b < 0x80 ? 1 : b < 0xE0 ? 2 : b < 0xF0 ? 3 : 4;
  }
  if (count <= max) return s;
  return s.substr(0, cut) + "\xE2\x80\xA6";
}

// HTML-escaped text (also safe inside a quoted attribute).
std::string esc(std::string_view raw) {
  const std::string s = clean(raw);
  std::string out;
  out.reserve(s.size() + 8);
  for (char c : s) {
    switch (c) {
      case '&':
        out += "&amp;";
        break;
      case '<':
        out += "&lt;";
        break;
      case '>':
        out += "&gt;";
        break;
      case '"':
        out += "&quot;";
        break;
      case '\'':
        out += "&#39;";
        break;
      default:
        out += c;
    }
  }
  return out;
}

std::string esc_short(std::string_view raw, std::size_t max) {
  return esc(shorten(clean(raw), max));
}

// 12345678 -> "12,345,678".
std::string count(std::int64_t v) {
  const std::string digits = std::to_string(v < 0 ? -v : v);
  std::string out;
  const std::size_t lead = digits.size() % 3;
  for (std::size_t i = 0; i < digits.size(); ++i) {
    if (i > 0 && (i + 3 - lead) % 3 == 0) out += ',';
    out += digits[i];
  }
  return v < 0 ? "\xE2\x88\x92" + out : out;
}

// `digits` significant digits as printf's %g writes them (so a checker can reproduce the text).
std::string g(double v, int digits) {
  if (std::isnan(v)) return "NA";
  if (std::isinf(v)) return v > 0 ? "inf" : "-inf";
  char buffer[48];
  std::snprintf(buffer, sizeof buffer, "%.*g", digits, v);
  return buffer;
}

std::string percent(double fraction, int decimals) {
  char buffer[48];
  std::snprintf(buffer, sizeof buffer, "%.*f%%", decimals, 100 * fraction);
  return buffer;
}

// An SVG coordinate: one decimal is a tenth of a pixel, finer than a screen or printer shows.
std::string xy(double v) {
  char buffer[32];
  const auto r = std::to_chars(buffer, buffer + sizeof buffer, std::round(v * 10) / 10,
                               std::chars_format::fixed, 1);
  std::string s(buffer, r.ptr);
  if (s.size() > 2 && s.compare(s.size() - 2, 2, ".0") == 0) s.resize(s.size() - 2);
  return s == "-0" ? "0" : s;
}

std::string shortest(double v) {
  std::string out;
  internal::append_number(out, v);
  return out;
}

std::string shortest(float v) {
  std::string out;
  internal::append_number(out, v);
  return out;
}

// 10 with a superscript exponent, e.g. 10⁻⁸.
std::string power_of_ten(int e) {
  static const char* digits[] = {"\xE2\x81\xB0", "\xC2\xB9",     "\xC2\xB2",     "\xC2\xB3",
                                 "\xE2\x81\xB4", "\xE2\x81\xB5", "\xE2\x81\xB6", "\xE2\x81\xB7",
                                 "\xE2\x81\xB8", "\xE2\x81\xB9"};
  if (e == 0) return "1";
  if (e == 1) return "10";
  std::string out = "10";
  if (e < 0) out += "\xE2\x81\xBB";
  const std::string d = std::to_string(e < 0 ? -e : e);
  for (char c : d) out += digits[c - '0'];
  return out;
}

std::string shell_quote(const std::string& word) {
  if (!word.empty() &&
      word.find_first_not_of(
          "abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ0123456789-_./=:,+@%") ==
          std::string::npos)
    return word;
  std::string out = "'";
  for (char c : word) out += c == '\'' ? std::string("'\\''") : std::string(1, c);
  return out + "'";
}

}  // namespace internal::html

}  // namespace pare
