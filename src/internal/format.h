// Text output helpers: shortest round-trip numbers and delimited-field quoting.
#pragma once

#include <string>       // std::string
#include <string_view>  // std::string_view

namespace pare::internal {

/// Appends the shortest text that reads back as exactly `value` ("NA" for NaN).
void append_number(std::string& out, double value);
/// Same for a float32 value (shortest float text, so 0.1f prints as 0.1).
void append_number(std::string& out, float value);
/// Appends `value` with `digits` significant digits (for people, not for round trips).
void append_rounded(std::string& out, double value, int digits);

/// Appends `field`, quoted as CSV does when it holds the delimiter, a quote or a line break.
void append_field(std::string& out, std::string_view field, char delimiter);

}  // namespace pare::internal
