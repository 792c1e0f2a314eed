#include "internal/format.h"

#include <charconv>  // std::to_chars
#include <cmath>     // std::isnan

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

void append_number(std::string& out, double value) { append_shortest(out, value); }
void append_number(std::string& out, float value) { append_shortest(out, value); }

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

void append_field(std::string& out, std::string_view field, char delimiter) {
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
