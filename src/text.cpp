#include "pare/text.h"

#include <algorithm>  // std::max
#include <cmath>      // std::isinf, std::abs
#include <cstdio>     // std::snprintf

#include "internal/format.h"

namespace pare {

std::string thousands(std::int64_t v) {
  std::string digits = std::to_string(v < 0 ? -v : v);
  std::string out;
  const int lead = static_cast<int>(digits.size() % 3);
  for (std::size_t i = 0; i < digits.size(); ++i) {
    if (i > 0 && (static_cast<int>(i) - lead) % 3 == 0) out += ',';
    out += digits[i];
  }
  return v < 0 ? "-" + out : out;
}

std::string fixed(double v, int decimals) {
  char buffer[64];
  std::snprintf(buffer, sizeof buffer, "%.*f", decimals, v);
  return buffer;
}

std::string percent(double fraction) {
  return fixed(100.0 * fraction, fraction > 0 && fraction < 0.001 ? 3 : 1) + "%";
}

const char* delimiter_name(char d) {
  return d == '\t' ? "tab" : d == ';' ? "semicolon" : "comma";
}

double seconds_since(std::chrono::steady_clock::time_point start) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
}

std::string short_number(double v) {
  std::string out;
  char buffer[32];
  if (std::isinf(v)) return "inf";
  if (v != 0 && (std::abs(v) < 1e-3 || std::abs(v) >= 1e6))
    std::snprintf(buffer, sizeof buffer, "%.3g", v);
  else
    std::snprintf(buffer, sizeof buffer, "%.4g", v);
  return buffer;
}

std::string table_text(const std::vector<std::vector<std::string>>& rows, std::size_t left) {
  std::string out;
  std::vector<std::size_t> width;
  for (const auto& row : rows)
    for (std::size_t c = 0; c < row.size(); ++c) {
      if (width.size() <= c) width.push_back(0);
      width[c] = std::max(width[c], row[c].size());
    }
  for (const auto& row : rows) {
    out += " ";
    for (std::size_t c = 0; c < row.size(); ++c) {
      const std::string pad(width[c] - row[c].size(), ' ');
      out += "  " + (c < left ? row[c] + pad : pad + row[c]);
    }
    out += "\n";
  }
  return out;
}

std::string spell_options(std::string_view text, std::string_view prefix, char separator) {
  std::string out;
  out.reserve(text.size());
  std::size_t at = 0;
  while (at < text.size()) {
    const std::size_t open = text.find('`', at);
    const std::size_t close = open == std::string_view::npos ? open : text.find('`', open + 1);
    if (close == std::string_view::npos) break;
    const std::string_view name = text.substr(open + 1, close - open - 1);
    bool is_name = !name.empty();
    for (const char c : name) is_name = is_name && ((c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '_');
    out.append(text.substr(at, open - at));
    if (is_name) {
      out.append(prefix);
      for (const char c : name) out += c == '_' ? separator : c;
      at = close + 1;
    } else {
      out += '`';
      at = open + 1;
    }
  }
  out.append(text.substr(at));
  return out;
}

std::vector<std::string> response_values(const std::vector<std::string>& labels, const std::vector<double>& target) {
  if (target.empty()) return labels;
  std::vector<std::string> text(target.size());
  for (std::size_t i = 0; i < target.size(); ++i) internal::append_number(text[i], target[i]);
  return text;
}

}  // namespace pare
