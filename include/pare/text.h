// Numbers and tables for people, as the run summaries write them.
#pragma once

#include <chrono>   // std::chrono::steady_clock
#include <cstdint>  // std::int64_t
#include <string>   // std::string
#include <string_view>  // std::string_view
#include <vector>   // std::vector

#include "pare/matrix.h"

namespace pare {

/// 12345678 -> "12,345,678".
std::string thousands(std::int64_t v);
/// `v` with `decimals` digits after the point.
std::string fixed(double v, int decimals);
/// A fraction as a percentage, "2.0%".
std::string percent(double fraction);
/// Four significant digits, or three in exponent form for very small or large values.
std::string short_number(double v);
const char* delimiter_name(char d);
double seconds_since(std::chrono::steady_clock::time_point start);
/// Rows as a table, each line indented by one space and each column padded to its widest cell;
/// the first `left` columns are left-aligned, the rest right-aligned.
std::string table_text(const std::vector<std::vector<std::string>>& rows, std::size_t left);

/// The per-sample response as text: the labels, or a continuous target's values written as the
/// outputs write numbers (shortest round trip); empty when the table has neither.
std::vector<std::string> response_values(const std::vector<std::string>& labels, const std::vector<double>& target);

/// The library's messages name an option by its field name in backquotes (`max_corr`); a front
/// end shows them in its own spelling: spell_options(text, "--", '-') gives --max-corr, as the
/// command line spells it. Text outside backquotes is copied as it is.
std::string spell_options(std::string_view text, std::string_view prefix, char separator);

}  // namespace pare
