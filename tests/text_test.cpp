// pare/text.h: numbers and tables for people, and options spelled for a front end.
#include <string>  // std::string

#include <catch2/catch.hpp>

#include "pare/text.h"

TEST_CASE("numbers for people", "[text]") {
  // Worked by hand.
  REQUIRE(pare::thousands(12345678) == "12,345,678");
  REQUIRE(pare::thousands(-1000) == "-1,000");
  REQUIRE(pare::thousands(999) == "999");
  REQUIRE(pare::fixed(2.345, 1) == "2.3");  // printf rounding of the binary value 2.34499...
  REQUIRE(pare::percent(0.025) == "2.5%");
  REQUIRE(pare::percent(0.0004) == "0.040%");
  REQUIRE(pare::short_number(1234.5678) == "1235");
  REQUIRE(pare::short_number(0.00012345) == "0.000123");
  REQUIRE(pare::table_text({{"a", "bb"}, {"ccc", "d"}}, 1) == "   a    bb\n   ccc   d\n");
}

TEST_CASE("spell_options: library messages in a front end's spelling", "[pipeline]") {
  REQUIRE(pare::spell_options("`max_corr` must be above 0 (`no_prune` skips it)", "--", '-') ==
          "--max-corr must be above 0 (--no-prune skips it)");
  REQUIRE(pare::spell_options("`max_corr` must be above 0", "", '_') == "max_corr must be above 0");
  // Only a lower-case name between two backquotes is an option; anything else is copied.
  REQUIRE(pare::spell_options("a `Name` and ` loose", "--", '-') == "a `Name` and ` loose");
  REQUIRE(pare::spell_options("trailing `keep", "--", '-') == "trailing `keep");
  REQUIRE(pare::spell_options("", "--", '-').empty());
}
