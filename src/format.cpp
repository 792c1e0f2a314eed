#include "internal/format.h"

#include <atomic>  // std::atomic

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

char* write_number(char* p, float value) {
  if (std::isnan(value)) {
    p[0] = 'N';
    p[1] = 'A';
    return p + 2;
  }
  return std::to_chars(p, p + kNumberRoom, value).ptr;
}

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
