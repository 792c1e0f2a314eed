// Text output helpers: shortest round-trip numbers and delimited-field quoting.
#pragma once

#include <cstddef>      // std::ptrdiff_t, std::size_t
#include <string>       // std::string
#include <string_view>  // std::string_view

namespace pare::internal {

/// Appends the shortest text that reads back as exactly `value` ("NA" for NaN).
void append_number(std::string& out, double value);
/// Same for a float32 value (shortest float text, so 0.1f prints as 0.1).
void append_number(std::string& out, float value);
/// Room a number written by write_number can take ("-1.17549435e-38" and the like, with margin).
inline constexpr std::size_t kNumberRoom = 24;
/// Writes the shortest text that reads back as exactly `value` ("NA" for NaN) at `p`, which must
/// have kNumberRoom bytes of room, and returns the end of what it wrote.
char* write_number(char* p, float value);
/// Writes exactly what std::to_chars(p, p + kNumberRoom, value) writes (shortest round-trip text,
/// plain or scientific, whichever is shorter; "nan", "inf"), about three times as fast.
char* write_shortest(char* p, float value);
/// Writes `delimiter` and then write_number(x[i * step]) for i < count, at `p`, which must have
/// count x (kNumberRoom + 1) bytes of room; returns the end.
char* write_numbers(char* p, const float* x, std::ptrdiff_t count, std::ptrdiff_t step, char delimiter);

/// Appends `value` with `digits` significant digits (for people, not for round trips).
void append_rounded(std::string& out, double value, int digits);

/// Appends `field`, quoted as CSV does when it holds the delimiter, a quote or a line break. With
/// the formula guard on (the default, see pare::set_formula_guard), a field a spreadsheet would
/// run as a formula (first character = + - @, tab or carriage return) gets a leading apostrophe,
/// as does one that already starts with an apostrophe followed by one of those, so reading it
/// back (remove_formula_guard) gives the name exactly.
void append_field(std::string& out, std::string_view field, char delimiter);

/// Whether `field` needs the formula guard.
bool needs_formula_guard(std::string_view field);
/// Undoes the guard of a field read from a file: drops a leading apostrophe followed by one of
/// = + - @ ' tab or carriage return.
void remove_formula_guard(std::string& field);

}  // namespace pare::internal
