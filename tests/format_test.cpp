// pare's float32 writer against libstdc++'s std::to_chars(first, last, float): the C++17
// shortest round-trip conversion (plain or scientific, whichever is shorter, plain on a tie), an
// implementation outside the project. The two must write the same bytes for every float.
//
// The test below checks about four million floats: an even stride over all 2^32 bit patterns,
// every exponent's edges (powers of two and their neighbours, where the rounding interval is
// lopsided), the subnormals nearest zero, the integers around 2^24 (above it std::to_chars prints
// the exact integer) and decimal texts like those in a data file. The hidden test after it checks
// every bit pattern (about two minutes on two cores):
//     build/release/pare_tests "[.exhaustive]"
#include "internal/format.h"

#include <charconv>  // std::to_chars
#include <cstdint>   // std::uint32_t, std::uint64_t
#include <cstring>   // std::memcpy
#include <random>    // std::mt19937_64
#include <string>    // std::string
#include <string_view>  // std::string_view
#include <vector>    // std::vector

#include <catch2/catch.hpp>

namespace {

float from_bits(std::uint32_t bits) {
  float f;
  std::memcpy(&f, &bits, sizeof f);
  return f;
}

// The first few bit patterns where the two differ (empty when they agree), and how many there were.
struct Mismatches {
  std::vector<std::string> first;
  std::uint64_t count = 0;
  void check(float f) {
    char expected[64], got[pare::internal::kNumberRoom];
    const char* e = std::to_chars(expected, expected + sizeof expected, f).ptr;
    const char* g = pare::internal::write_shortest(got, f);
    const std::string_view want(expected, static_cast<std::size_t>(e - expected)),
        have(got, static_cast<std::size_t>(g - got));
    if (want == have) return;
    if (++count <= 5) first.push_back(std::string(want) + " written as " + std::string(have));
  }
};

}  // namespace

TEST_CASE("the float writer writes what std::to_chars writes", "[format]") {
  Mismatches m;
  // An odd stride over every bit pattern (NaNs included: "nan", "-nan"), both signs.
  for (std::uint64_t i = 12345; i < (std::uint64_t{1} << 32); i += 2011) m.check(from_bits(static_cast<std::uint32_t>(i)));
  // Each exponent's first and last floats and their neighbours.
  for (std::uint32_t e = 0; e < 256; ++e)
    for (std::uint32_t f : {0u, 1u, 2u, 3u, 0x3FFFFFu, 0x400000u, 0x7FFFFDu, 0x7FFFFEu, 0x7FFFFFu})
      for (std::uint32_t sign : {0u, 1u}) m.check(from_bits(sign << 31 | e << 23 | f));
  // Subnormals nearest zero and the smallest normals.
  for (std::uint32_t b = 0; b < 200000; ++b) m.check(from_bits(b));
  for (std::uint32_t b = 0x00800000; b < 0x00800000 + 100000; ++b) m.check(from_bits(b));
  // Integers around 2^24 and the powers of ten up to 10^10, where plain text ends in zeros.
  for (std::int64_t v = (1 << 24) - 50000; v < (1 << 24) + 400000; ++v) m.check(static_cast<float>(v));
  for (double p = 10; p <= 1e10; p *= 10)
    for (std::uint32_t d = 0; d < 4096; ++d) {
      std::uint32_t bits;
      const auto f = static_cast<float>(p);
      std::memcpy(&bits, &f, sizeof bits);
      m.check(from_bits(bits - 2048 + d));
    }
  // Decimal texts of 1 to 9 significant digits, read as a reader would (round to nearest).
  std::mt19937_64 rng(20261202);
  for (int i = 0; i < 1000000; ++i) {
    const auto digits = static_cast<double>(rng() % 1000000000);
    const int exponent = static_cast<int>(rng() % 30) - 20;
    m.check(static_cast<float>(std::stod(std::to_string(static_cast<std::uint64_t>(digits)) + "e" + std::to_string(exponent))));
  }
  INFO("first differences: " << (m.first.empty() ? std::string("none") : m.first.front()));
  CHECK(m.count == 0);
}

TEST_CASE("the float writer's plain and scientific forms", "[format]") {
  // Fixed expectations from the C++17 rule (shortest digits; plain unless scientific is shorter;
  // at least two exponent digits, as printf writes them): worked by hand.
  auto text = [](float f) {
    char buffer[pare::internal::kNumberRoom];
    const char* end = pare::internal::write_shortest(buffer, f);
    return std::string(buffer, static_cast<std::size_t>(end - buffer));
  };
  CHECK(text(0.0f) == "0");
  CHECK(text(-0.0f) == "-0");
  CHECK(text(0.1f) == "0.1");
  CHECK(text(0.001f) == "0.001");
  CHECK(text(0.0001f) == "1e-04");
  CHECK(text(1e4f) == "10000");  // a tie (5 characters each) goes to plain
  CHECK(text(1e5f) == "1e+05");
  CHECK(text(1e6f) == "1e+06");
  CHECK(text(123456.0f) == "123456");
  CHECK(text(1.5e-7f) == "1.5e-07");
  CHECK(text(-7.52495f) == "-7.52495");
  CHECK(text(16777216.0f) == "16777216");
  CHECK(text(33565872.0f) == "33565872");  // not 33565870: plain text prints the exact integer
  CHECK(text(3.4028235e38f) == "3.4028235e+38");
  CHECK(text(1e-45f) == "1e-45");
}

TEST_CASE("the float writer on every float", "[.exhaustive]") {
  Mismatches m;
#pragma omp parallel
  {
    Mismatches local;
#pragma omp for schedule(static, 1 << 16)
    for (std::int64_t i = 0; i < (std::int64_t{1} << 32); ++i) local.check(from_bits(static_cast<std::uint32_t>(i)));
#pragma omp critical
    {
      m.count += local.count;
      m.first.insert(m.first.end(), local.first.begin(), local.first.end());
    }
  }
  INFO("first differences: " << (m.first.empty() ? std::string("none") : m.first.front()));
  CHECK(m.count == 0);
}
