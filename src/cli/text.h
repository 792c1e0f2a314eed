// Text helpers for what the commands print: numbers for people, tables, paths.
#pragma once

#include <chrono>   // std::chrono::steady_clock
#include <cstdint>  // std::int64_t
#include <ostream>  // std::ostream
#include <string>   // std::string
#include <vector>   // std::vector

#include "pare/matrix.h"

namespace pare::cli {

/// 12345678 -> "12,345,678".
std::string thousands(std::int64_t v);
/// `v` with `decimals` digits after the point.
std::string fixed(double v, int decimals);
/// A fraction as a percentage, "2.0%".
std::string percent(double fraction);
/// Four significant digits, or three in exponent form for very small or large values.
std::string short_number(double v);
const char* layout_name(Layout l);
const char* delimiter_name(char d);
double seconds_since(std::chrono::steady_clock::time_point start);
/// `dir`/`name`, or just `name` when dir is ".".
std::string join_path(const std::string& dir, const std::string& name);
/// Prints rows as a table, each column padded to its widest cell; the first `left` columns are
/// left-aligned, the rest right-aligned.
void print_table(std::ostream& out, const std::vector<std::vector<std::string>>& rows, std::size_t left);

}  // namespace pare::cli
