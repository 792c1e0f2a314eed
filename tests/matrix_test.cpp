// The table and its labels (include/pare/matrix.h): class encoding. (Columns, the matrix in
// memory or in a cache file, is tested with --memory in memory_test.cpp.)
#include "pare/matrix.h"

#include <cstdint>  // std::int64_t
#include <string>   // std::string
#include <vector>   // std::vector

#include <catch2/catch.hpp>

#include "support/public_data.h"

using Names = std::vector<std::string>;

TEST_CASE("encode_classes sorts classes by name and counts them", "[matrix]") {
  const pare::ClassCodes c = pare::encode_classes({"wet", "dry", "wet", "wet", "10", "9"});
  // Labels are strings: "10" sorts before "9" (byte order), numeric-looking or not (SPEC §3).
  REQUIRE(c.classes == Names{"10", "9", "dry", "wet"});
  REQUIRE(c.codes == std::vector<int>{3, 2, 3, 3, 0, 1});
  REQUIRE(c.counts == std::vector<std::int64_t>{1, 1, 1, 3});
  const pare::ClassCodes empty = pare::encode_classes({});
  REQUIRE(empty.classes.empty());
  REQUIRE(empty.codes.empty());
}

TEST_CASE("encode_classes counts the published class sizes of iris and wine", "[matrix]") {
  // Class sizes as the datasets' descriptions in Debian's python3-sklearn state them
  // (sklearn/datasets/descr/iris.rst: "150 (50 in each of three classes)"; wine_data.rst:
  // "class_0 (59), class_1 (71), class_2 (48)"); the class column of the data files is 0, 1, 2.
  const pare::test::PublicData iris = pare::test::read_public("iris.csv", 1);
  const pare::test::PublicData wine = pare::test::read_public("wine_data.csv", 1);
  if (!iris.present || !wine.present) return;
  const pare::ClassCodes i = pare::encode_classes(iris.classes);
  CHECK(i.classes == Names{"0", "1", "2"});
  CHECK(i.counts == std::vector<std::int64_t>{50, 50, 50});
  const pare::ClassCodes w = pare::encode_classes(wine.classes);
  CHECK(w.classes == Names{"0", "1", "2"});
  CHECK(w.counts == std::vector<std::int64_t>{59, 71, 48});
  for (std::size_t k = 0; k < wine.classes.size(); ++k)
    CHECK(w.classes[static_cast<std::size_t>(w.codes[k])] == wine.classes[k]);
}
