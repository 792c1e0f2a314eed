// Public data sets shipped by Debian's python3-sklearn (CHECKS.md §10), as text, for tests that
// build input files of realistic shapes from real numbers: the values are kept exactly as the
// dataset file writes them. A missing file skips the test outside CI and fails it under CI=true
// (scripts/install-deps.sh installs python3-sklearn).
#pragma once

#include <cstdlib>  // std::getenv
#include <sstream>  // std::istringstream
#include <string>   // std::string
#include <vector>   // std::vector

#include <catch2/catch.hpp>

#include "pare/io.h"

namespace pare::test {

/// A data set: per sample its values (text as in the file) and its class index (text).
struct PublicData {
  std::vector<std::vector<std::string>> values;  ///< [sample][feature]
  std::vector<std::string> classes;              ///< per sample
  bool present = false;
  std::size_t n() const { return values.size(); }
  std::size_t p() const { return values.empty() ? 0 : values.front().size(); }
};

inline bool in_ci() {
  const char* ci = std::getenv("CI");
  return ci != nullptr && std::string(ci) == "true";
}

/// Reads /usr/lib/python3/dist-packages/sklearn/datasets/data/NAME: `header_lines` lines skipped
/// (1 for the `n,p,classes` header of iris/wine/breast_cancer, 0 for digits), comma-separated,
/// the last field the class. At most `max_rows` samples (0 = all).
inline PublicData read_public(const std::string& name, int header_lines, std::size_t max_rows = 0) {
  const std::string path = "/usr/lib/python3/dist-packages/sklearn/datasets/data/" + name;
  PublicData d;
  std::string text;
  try {
    text = pare::read_file_text(path);
  } catch (const std::exception&) {
    INFO("dataset file " << path << " is missing; CI=true makes that a failure");
    REQUIRE_FALSE(in_ci());
    WARN("skipped: " << path << " not found (install python3-sklearn)");
    return d;
  }
  std::istringstream in(text);
  std::string line;
  for (int i = 0; i < header_lines; ++i) std::getline(in, line);
  while (std::getline(in, line) && (max_rows == 0 || d.values.size() < max_rows)) {
    if (line.empty()) continue;
    std::vector<std::string> fields = pare::split_fields(line, ',');
    d.classes.push_back(fields.back());
    fields.pop_back();
    d.values.push_back(std::move(fields));
  }
  d.present = !d.values.empty();
  return d;
}

/// The data as a rows=samples CSV: `sample` (s1, s2, ...), f1..fp as the file writes them, and
/// the label column `class` (c0, c1, ...).
inline std::string labelled_csv_text(const PublicData& d) {
  std::string csv = "sample";
  for (std::size_t j = 0; j < d.p(); ++j) csv += ",f" + std::to_string(j + 1);
  csv += ",class\n";
  for (std::size_t i = 0; i < d.n(); ++i) {
    csv += "s" + std::to_string(i + 1);
    for (const auto& v : d.values[i]) csv += "," + v;
    csv += ",c" + d.classes[i] + "\n";
  }
  return csv;
}

}  // namespace pare::test
