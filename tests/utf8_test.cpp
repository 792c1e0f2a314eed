// UTF-8 checks (src/internal/utf8.h): which names are text, and the printable form of messages.
#include "internal/utf8.h"

#include <cstdint>  // std::uint64_t
#include <random>   // std::mt19937_64
#include <sstream>  // std::istringstream
#include <string>   // std::string
#include <vector>   // std::vector

#include <catch2/catch.hpp>

#include "support/python_reference.h"
#include "support/temp_dir.h"

namespace {

using pare::internal::invalid_utf8_at;
using pare::internal::printable;
using pare::internal::utf8_sequence;

// The Unicode Standard, chapter 3, Table 3-7 "Well-Formed UTF-8 Byte Sequences": per row the
// range of each byte (recalled from memory; the Python test below checks the same ground).
struct Row {
  int length;
  unsigned char lo[4], hi[4];
};
constexpr Row kTable37[] = {
    {1, {0x00}, {0x7F}},                                      // U+0000..U+007F
    {2, {0xC2, 0x80}, {0xDF, 0xBF}},                          // U+0080..U+07FF
    {3, {0xE0, 0xA0, 0x80}, {0xE0, 0xBF, 0xBF}},              // U+0800..U+0FFF
    {3, {0xE1, 0x80, 0x80}, {0xEC, 0xBF, 0xBF}},              // U+1000..U+CFFF
    {3, {0xED, 0x80, 0x80}, {0xED, 0x9F, 0xBF}},              // U+D000..U+D7FF
    {3, {0xEE, 0x80, 0x80}, {0xEF, 0xBF, 0xBF}},              // U+E000..U+FFFF
    {4, {0xF0, 0x90, 0x80, 0x80}, {0xF0, 0xBF, 0xBF, 0xBF}},  // U+10000..U+3FFFF
    {4, {0xF1, 0x80, 0x80, 0x80}, {0xF3, 0xBF, 0xBF, 0xBF}},  // U+40000..U+FFFFF
    {4, {0xF4, 0x80, 0x80, 0x80}, {0xF4, 0x8F, 0xBF, 0xBF}},  // U+100000..U+10FFFF
};

// The length of the well-formed sequence `s` starts with according to Table 3-7, or 0.
std::size_t table_length(const std::string& s) {
  for (const Row& row : kTable37) {
    if (s.size() < static_cast<std::size_t>(row.length)) continue;
    bool match = true;
    for (int k = 0; k < row.length && match; ++k) {
      const auto c = static_cast<unsigned char>(s[static_cast<std::size_t>(k)]);
      match = c >= row.lo[k] && c <= row.hi[k];
    }
    if (match) return static_cast<std::size_t>(row.length);
  }
  return 0;
}

std::string bytes(std::initializer_list<int> values) {
  std::string out;
  for (const int v : values) out += static_cast<char>(v);
  return out;
}

}  // namespace

TEST_CASE("utf8: sequences of one to three bytes, every one, as Table 3-7 says", "[utf8]") {
  std::string s(3, '\0');
  std::size_t checked = 0, mismatches = 0;
  for (int a = 0; a < 256; ++a) {
    s.assign(1, static_cast<char>(a));
    mismatches += utf8_sequence(s, 0) != table_length(s);
    for (int b = 0; b < 256; ++b) {
      s.assign({static_cast<char>(a), static_cast<char>(b)});
      mismatches += utf8_sequence(s, 0) != table_length(s);
      for (int c = 0; c < 256; ++c) {
        s.assign({static_cast<char>(a), static_cast<char>(b), static_cast<char>(c)});
        mismatches += utf8_sequence(s, 0) != table_length(s);
        ++checked;
      }
    }
  }
  INFO(checked << " three-byte strings");
  CHECK(mismatches == 0);
}

TEST_CASE("utf8: four-byte sequences at every lead and second byte, edges of the rest", "[utf8]") {
  const int edges[] = {0x00, 0x41, 0x7F, 0x80, 0x8F, 0x90, 0x9F, 0xA0, 0xBF, 0xC0, 0xF4, 0xFF};
  std::size_t mismatches = 0;
  for (int a = 0; a < 256; ++a)
    for (int b = 0; b < 256; ++b)
      for (const int c : edges)
        for (const int d : edges) {
          const std::string s = bytes({a, b, c, d});
          mismatches += utf8_sequence(s, 0) != table_length(s);
        }
  CHECK(mismatches == 0);
}

TEST_CASE("utf8: the first byte that is not UTF-8 is where Python's strict decoder stops",
          "[utf8]") {
  // Strings of valid characters of every length (U+0000..U+10FFFF, surrogates skipped) mixed
  // with damage: a random byte, a truncated sequence, an encoded surrogate, an overlong form.
  std::mt19937_64 rng(7);
  const auto encode = [](std::uint32_t cp) {
    if (cp < 0x80) return bytes({static_cast<int>(cp)});
    if (cp < 0x800)
      return bytes({0xC0 | static_cast<int>(cp >> 6), 0x80 | static_cast<int>(cp & 0x3F)});
    if (cp < 0x10000)
      return bytes({0xE0 | static_cast<int>(cp >> 12), 0x80 | static_cast<int>((cp >> 6) & 0x3F),
                    0x80 | static_cast<int>(cp & 0x3F)});
    return bytes({0xF0 | static_cast<int>(cp >> 18), 0x80 | static_cast<int>((cp >> 12) & 0x3F),
                  0x80 | static_cast<int>((cp >> 6) & 0x3F), 0x80 | static_cast<int>(cp & 0x3F)});
  };
  std::vector<std::string> cases;
  for (int i = 0; i < 3000; ++i) {
    std::string s;
    const int length = static_cast<int>(rng() % 12);
    for (int k = 0; k < length; ++k) {
      const int kind = static_cast<int>(rng() % 20);
      if (kind == 0)
        s += static_cast<char>(rng() & 0xFF);
      else if (kind == 1)
        s += encode(0x800 + static_cast<std::uint32_t>(rng() % 0x10F800)).substr(0, 1 + rng() % 2);
      else if (kind == 2)
        s += encode(0xD800 + static_cast<std::uint32_t>(rng() % 0x800));  // a surrogate
      else if (kind == 3)
        s += bytes({0xC0 | static_cast<int>(rng() % 2), 0x80 | static_cast<int>(rng() % 64)});
      else if (kind == 4)
        s += bytes({0xF4 + static_cast<int>(rng() % 4), 0x90, 0x80, 0x80});  // past U+10FFFF
      else {
        std::uint32_t cp = static_cast<std::uint32_t>(rng() % (kind < 12 ? 0x80 : 0x110000));
        if (cp >= 0xD800 && cp < 0xE000) cp -= 0x800;
        s += encode(cp);
      }
    }
    cases.push_back(std::move(s));
  }
  pare::test::TempDir dir;
  std::string hex;
  for (const auto& s : cases) {
    static constexpr char kHex[] = "0123456789abcdef";
    for (const char c : s) {
      hex += kHex[static_cast<unsigned char>(c) >> 4];
      hex += kHex[static_cast<unsigned char>(c) & 15];
    }
    hex += '\n';
  }
  // Reference: Python 3's strict UTF-8 codec (Debian's /usr/bin/python3); the offset of the
  // first byte it cannot decode is UnicodeDecodeError.start, -1 when the whole string decodes.
  const auto reference =
      pare::test::python_output(dir,
                                "import sys\n"
                                "for line in open(sys.argv[1]):\n"
                                "    try:\n"
                                "        bytes.fromhex(line.strip()).decode('utf-8')\n"
                                "        print(-1)\n"
                                "    except UnicodeDecodeError as e:\n"
                                "        print(e.start)\n",
                                {dir.write("cases.txt", hex)});
  if (!reference) return;
  std::istringstream lines(*reference);
  std::size_t valid = 0;
  for (const auto& s : cases) {
    long long expected = 0;
    lines >> expected;
    const std::size_t at = invalid_utf8_at(s);
    INFO("case of " << s.size() << " bytes: " << printable(s));
    CHECK((at == std::string_view::npos ? -1LL : static_cast<long long>(at)) == expected);
    valid += expected == -1;
  }
  INFO(valid << " of " << cases.size() << " valid");
  CHECK(valid > 100);  // both kinds are well represented
  CHECK(valid < cases.size() - 100);
}

TEST_CASE("utf8: printable escapes line breaks, control bytes and bytes that are not UTF-8",
          "[utf8]") {
  // The one-line form pare::Error documents (include/pare/error.h): \n, \t, \xNN in upper case.
  CHECK(printable("plain text, 1.5") == "plain text, 1.5");
  CHECK(printable("two\nlines") == "two\\nlines");
  CHECK(printable("a\tb\r\n") == "a\\tb\\x0D\\n");
  CHECK(printable(bytes({'x', 0x00, 0x01, 0x1F, 0x7F, 'y'})) == "x\\x00\\x01\\x1F\\x7Fy");
  CHECK(printable("caf\xC3\xA9 \xE2\x82\xAC \xF0\x9D\x84\x9E") ==
        "caf\xC3\xA9 \xE2\x82\xAC \xF0\x9D\x84\x9E");
  CHECK(printable(bytes({'l', 'a', 't', 'i', 'n', '1', ' ', 0xE9, '!'})) == "latin1 \\xE9!");
  // A truncated sequence: each of its bytes is escaped, the text after it kept.
  CHECK(printable(bytes({0xE2, 0x82, 'x'})) == "\\xE2\\x82x");
  CHECK(printable(bytes({0xED, 0xA0, 0x80})) == "\\xED\\xA0\\x80");  // an encoded surrogate
  CHECK(printable("") == "");
}
