// pare::profile_table flags and counts, and the profile.tsv text.
//
// The expected statistics are closed forms of the small columns below (worked by hand in the
// comments); flags follow the thresholds documented in include/pare/profile.h.
#include "pare/profile.h"

#include <cmath>    // std::sqrt, std::isnan
#include <limits>   // std::numeric_limits
#include <sstream>  // std::istringstream
#include <string>   // std::string, std::stod
#include <vector>   // std::vector

#include <catch2/catch.hpp>

namespace {

constexpr float kNA = std::numeric_limits<float>::quiet_NaN();
using Names = std::vector<std::string>;

// Five samples, ten features, one per flag case (columns are features).
pare::FeatureTable make_table() {
  pare::FeatureTable t;
  t.feature_names = {"ok", "gone", "flat", "tiny", "holes", "dup", "dup", "one", "c1", "c2"};
  t.sample_ids = {"s1", "s2", "s3", "s4", "s5"};
  t.labels = {"dry", "wet", "dry", "dry", "wet"};
  t.label_name = "condition";
  t.values.resize(5, 10);
  t.values.col(0) << 1, 2, 3, 4, kNA;                     // 1 of 5 missing = 0.2: not "above"
  t.values.col(1) << kNA, kNA, kNA, kNA, kNA;             // all missing
  t.values.col(2) << 5, 5, 5, 5, 5;                       // constant
  t.values.col(3) << 100, 100.01f, 99.99f, 100, 100.02f;  // sd ~0.011, cv ~1.1e-4 < 1e-3
  t.values.col(4) << 1, kNA, kNA, 4, 7;                   // 2 of 5 missing = 0.4
  t.values.col(5) << 1, 2, 3, 4, 5;
  t.values.col(6) << 5, 4, 3, 2, 1;
  t.values.col(7) << kNA, kNA, kNA, kNA, 3;  // one value: constant, variance NA
  t.values.col(8) << 1, 2, 3, 4, 5;
  t.values.col(9) << 100, 100.2f, 99.8f, 100, 100.2f;  // sd ~0.167, cv ~1.7e-3: not flagged
  return t;
}

std::vector<std::string> split(const std::string& line, char sep) {
  std::vector<std::string> out;
  std::string field;
  std::istringstream in(line);
  while (std::getline(in, field, sep)) out.push_back(field);
  if (!line.empty() && line.back() == sep) out.emplace_back();
  return out;
}

std::vector<std::string> lines_of(const std::string& text) {
  std::vector<std::string> out;
  std::istringstream in(text);
  std::string line;
  while (std::getline(in, line)) out.push_back(line);
  return out;
}

}  // namespace

TEST_CASE("profile_table flags each feature case", "[profile]") {
  const pare::FeatureTable t = make_table();
  const pare::Profile p = pare::profile_table(t);
  using pare::kFlagAllMissing, pare::kFlagConstant, pare::kFlagNearConstant,
      pare::kFlagMostlyMissing, pare::kFlagDuplicateName;
  const std::vector<std::uint8_t> expected = {
      0,                                     // ok
      kFlagAllMissing | kFlagMostlyMissing,  // gone
      kFlagConstant,                         // flat
      kFlagNearConstant,                     // tiny
      kFlagMostlyMissing,                    // holes
      kFlagDuplicateName,                    // dup
      kFlagDuplicateName,                    // dup
      kFlagConstant | kFlagMostlyMissing,    // one
      0,                                     // c1
      0,                                     // c2
  };
  REQUIRE(p.flags.size() == expected.size());
  for (std::size_t j = 0; j < expected.size(); ++j) {
    INFO("feature " << t.feature_names[j] << " flags " << pare::flag_names(p.flags[j]));
    REQUIRE(static_cast<int>(p.flags[j]) == static_cast<int>(expected[j]));
  }
  REQUIRE(p.n_all_missing == 1);
  REQUIRE(p.n_constant == 2);
  REQUIRE(p.n_near_constant == 1);
  REQUIRE(p.n_mostly_missing == 3);
  REQUIRE(p.n_duplicate_name == 2);
  REQUIRE(p.missing_cells == 1 + 5 + 2 + 4);

  // Missing per sample: s1 gone+one = 2, s2 gone+holes+one = 3, s3 = 3, s4 = 2, s5 ok+gone = 2.
  REQUIRE(p.sample_missing == std::vector<std::int64_t>{2, 3, 3, 2, 2});
  // Over 20% of 10 features means 3 or more: 2/10 = 0.2 is not above.
  REQUIRE(p.samples_over == std::vector<std::int64_t>{1, 2});

  REQUIRE(p.classes.classes == Names{"dry", "wet"});
  REQUIRE(p.classes.counts == std::vector<std::int64_t>{3, 2});

  // Statistics are those of compute_column_stats (checked in stats_test.cpp).
  REQUIRE(p.features.size() == 10);
  REQUIRE(p.features[0].n == 4);
  REQUIRE(p.features[0].mean == 2.5);
}

TEST_CASE("profile_table thresholds come from ProfileOptions", "[profile]") {
  const pare::FeatureTable t = make_table();
  pare::ProfileOptions o;
  o.mostly_missing = 0.5;     // only "gone" (1.0) and "one" (0.8) are above
  o.sample_missing = 0.25;    // 3/10 is above, 2/10 is not
  o.near_constant_cv = 0.01;  // now c2 (cv ~1.7e-3) is near-constant too
  o.threads = 2;
  const pare::Profile p = pare::profile_table(t, o);
  REQUIRE(p.n_mostly_missing == 2);
  REQUIRE((p.flags[4] & pare::kFlagMostlyMissing) == 0);
  REQUIRE(p.n_near_constant == 2);
  REQUIRE((p.flags[9] & pare::kFlagNearConstant) != 0);
  REQUIRE(p.samples_over == std::vector<std::int64_t>{1, 2});

  pare::FeatureTable unlabelled = t;
  unlabelled.labels.clear();
  REQUIRE(pare::profile_table(unlabelled).classes.classes.empty());
}

TEST_CASE("flag_names lists set flags in a fixed order", "[profile]") {
  REQUIRE(pare::flag_names(0).empty());
  REQUIRE(pare::flag_names(pare::kFlagDuplicateName | pare::kFlagConstant) ==
          "constant,duplicate_name");
  REQUIRE(pare::flag_names(31) ==
          "all_missing,constant,near_constant,mostly_missing,duplicate_name");
}

TEST_CASE("profile_tsv: header, 1-based index, NA for undefined statistics", "[profile]") {
  pare::FeatureTable t = make_table();
  t.feature_names[8] = "c\t1";  // a name holding the delimiter is quoted
  const pare::Profile p = pare::profile_table(t);
  const std::string tsv = pare::profile_tsv(t, p);
  REQUIRE(tsv.back() == '\n');
  const auto lines = lines_of(tsv);
  REQUIRE(lines.size() == 11);
  REQUIRE(lines[0] ==
          "feature\tindex\tn\tmissing\tmissing_rate\tmean\tvariance\tsd\tmin\tmax\tflags");

  // "ok" = 1, 2, 3, 4, NA: n 4, missing 1, rate 0.2, mean 2.5, variance 5/3 (squared deviations
  // 2.25 + 0.25 + 0.25 + 2.25 = 5, over n - 1 = 3), sd sqrt(5/3). Numbers print as shortest
  // round-trip text, so reading them back gives the same doubles.
  const auto ok = split(lines[1], '\t');
  REQUIRE(ok.size() == 11);
  REQUIRE(ok[0] == "ok");
  REQUIRE(ok[1] == "1");
  REQUIRE(ok[2] == "4");
  REQUIRE(ok[3] == "1");
  REQUIRE(std::stod(ok[4]) == 0.2);
  REQUIRE(std::stod(ok[5]) == 2.5);
  REQUIRE(std::stod(ok[6]) == 5.0 / 3.0);
  REQUIRE(std::stod(ok[7]) == std::sqrt(5.0 / 3.0));
  REQUIRE(ok[8] == "1");
  REQUIRE(ok[9] == "4");
  REQUIRE(ok[10].empty());

  // "gone": nothing observed, so every statistic is NA.
  REQUIRE(lines[2] == "gone\t2\t0\t5\t1\tNA\tNA\tNA\tNA\tNA\tall_missing,mostly_missing");
  // "one": a single value; mean, min and max exist, variance and sd do not.
  REQUIRE(lines[8] == "one\t8\t1\t4\t0.8\t3\tNA\tNA\t3\t3\tconstant,mostly_missing");
  // min and max are float32 values and print as such: 100.01f reads "100.01", not 100.01000213...
  const auto tiny = split(lines[4], '\t');
  REQUIRE(tiny[8] == "99.99");
  REQUIRE(tiny[9] == "100.02");
  REQUIRE(tiny[10] == "near_constant");
  REQUIRE(lines[9].rfind("\"c\t1\"\t9\t5\t0\t0\t3\t", 0) == 0);
  REQUIRE(split(lines[10], '\t')[1] == "10");

  // The text does not depend on the thread count.
  pare::ProfileOptions two;
  two.threads = 2;
  pare::ProfileOptions one;
  one.threads = 1;
  REQUIRE(pare::profile_tsv(t, pare::profile_table(t, one)) ==
          pare::profile_tsv(t, pare::profile_table(t, two)));
}

TEST_CASE("profile_table flags names the reader made unique, the first and the renamed", "[profile]") {
  // As read_table leaves a file whose header is "id,dup,x,dup,dup,dup#2": the repeats renamed
  // (dup#3, dup#4: dup#2 is the file's own name) and listed in `renamed` (tests/io_test.cpp).
  pare::FeatureTable t;
  t.feature_names = {"dup", "x", "dup#3", "dup#4", "dup#2"};
  t.renamed = {{2, "dup"}, {3, "dup"}};
  t.sample_ids = {"s1", "s2"};
  t.values.resize(2, 5);
  t.values << 1, 2, 3, 4, 5, 6, 7, 8, 9, 10;
  const pare::Profile p = pare::profile_table(t);
  const std::vector<std::uint8_t> expected = {pare::kFlagDuplicateName, 0, pare::kFlagDuplicateName,
                                              pare::kFlagDuplicateName, 0};
  REQUIRE(p.flags == expected);
  REQUIRE(p.n_duplicate_name == 3);
  // profile.tsv names them as every other output does.
  const auto lines = lines_of(pare::profile_tsv(t, p));
  REQUIRE(lines[3].rfind("dup#3\t3\t", 0) == 0);
  REQUIRE(split(lines[3], '\t')[10] == "duplicate_name");
  REQUIRE(split(lines[5], '\t')[10].empty());
}
