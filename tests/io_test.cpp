// Reader round trips through pare::read_table on small files written to a temporary folder.
//
// Expected values are the decimal texts the tests write, converted to float32 by the compiler
// (IEEE 754 round to nearest, which a correct reader must reproduce exactly), so comparisons are
// exact unless a comment says otherwise.
#include "pare/io.h"

#include <charconv>  // std::to_chars
#include <fast_float/fast_float.h>
#include <cmath>     // std::isnan, std::isinf
#include <cstdio>    // std::snprintf
#include <cstdlib>   // std::abs
#include <cstring>   // std::memcmp
#include <limits>    // std::numeric_limits
#include <random>    // std::mt19937_64
#include <string>    // std::string
#include <utility>   // std::pair
#include <vector>    // std::vector

#include <catch2/catch.hpp>

#include "pare/error.h"

#include "support/temp_dir.h"

namespace {

using pare::FeatureTable;
using pare::Layout;
using pare::ReadOptions;
using pare::test::TempDir;
using Names = std::vector<std::string>;

ReadOptions options(Layout layout = Layout::kRowsAreSamples) {
  ReadOptions o;
  o.layout = layout;
  o.threads = 1;
  return o;
}

// Same shape and the same bytes (NaN payloads included): "bit-identical".
bool same_bits(const pare::Matrix& a, const pare::Matrix& b) {
  return a.rows() == b.rows() && a.cols() == b.cols() &&
         std::memcmp(a.data(), b.data(), sizeof(float) * static_cast<std::size_t>(a.size())) == 0;
}

void require_same_table(const FeatureTable& a, const FeatureTable& b) {
  REQUIRE(a.feature_names == b.feature_names);
  REQUIRE(a.sample_ids == b.sample_ids);
  REQUIRE(a.labels == b.labels);
  REQUIRE(same_bits(a.values, b.values));
}

// The message of the pare::Error that `fn` throws, after checking its kind.
template <typename Fn>
std::string error_of(Fn&& fn, pare::ErrorKind kind = pare::ErrorKind::kInput) {
  try {
    fn();
  } catch (const pare::Error& e) {
    INFO(e.what());
    REQUIRE(e.kind() == kind);
    return e.what();
  }
  FAIL("no pare::Error was thrown");
  return {};
}

std::string gzip_file(const TempDir& dir, const std::string& name,
                      const std::vector<std::string>& members, int level = 6) {
  const std::string path = dir.file(name);
  pare::OutputFile f(path);
  for (const auto& m : members) f.write_gzip(m, level);  // one gzip member per call
  f.commit();
  return path;
}

}  // namespace

TEST_CASE("rows=samples and rows=features layouts give the same table", "[io]") {
  TempDir dir;
  const auto samples = dir.write("samples.csv",
                                 "sample,g1,g2,g3\n"
                                 "s1,1.5,-2,3e2\n"
                                 "s2,0.25,NA,7\n");
  const auto features = dir.write("features.csv",
                                  "feature,s1,s2\n"
                                  "g1,1.5,0.25\n"
                                  "g2,-2,NA\n"
                                  "g3,3e2,7\n");
  const FeatureTable a = pare::read_table(samples, options(Layout::kRowsAreSamples));
  const FeatureTable b = pare::read_table(features, options(Layout::kRowsAreFeatures));
  REQUIRE(a.n_samples() == 2);
  REQUIRE(a.n_features() == 3);
  REQUIRE(a.feature_names == Names{"g1", "g2", "g3"});
  REQUIRE(a.sample_ids == Names{"s1", "s2"});
  REQUIRE(a.values(0, 0) == 1.5f);
  REQUIRE(a.values(1, 0) == 0.25f);
  REQUIRE(a.values(0, 1) == -2.0f);
  REQUIRE(std::isnan(a.values(1, 1)));
  REQUIRE(a.values(0, 2) == 300.0f);
  REQUIRE(a.values(1, 2) == 7.0f);
  REQUIRE(a.layout == Layout::kRowsAreSamples);
  REQUIRE(b.layout == Layout::kRowsAreFeatures);
  REQUIRE(a.source == samples);
  require_same_table(a, b);
}

TEST_CASE("the delimiter is detected from the header: comma, tab, semicolon", "[io]") {
  TempDir dir;
  struct Case {
    char delimiter;
    const char* text;  // the names hold one of the other delimiters, outnumbered
  };
  const Case cases[] = {
      {',', "id,a;b,c\ns1,1,2\ns2,3,4\n"},
      {'\t', "id\ta,b\tc\ns1\t1\t2\ns2\t3\t4\n"},
      {';', "id;a,b;c\ns1;1;2\ns2;3;4\n"},
  };
  for (const auto& c : cases) {
    INFO("delimiter code " << static_cast<int>(c.delimiter));
    const auto path = dir.write("d.txt", c.text);
    const FeatureTable t = pare::read_table(path, options());
    REQUIRE(t.delimiter == c.delimiter);
    REQUIRE(t.n_features() == 2);
    REQUIRE(t.sample_ids == Names{"s1", "s2"});
    REQUIRE(t.values(1, 1) == 4.0f);
  }
  // Delimiters inside quotes do not count.
  REQUIRE(pare::detect_delimiter("\"a;b;c\",d") == ',');
  REQUIRE(pare::detect_delimiter("id;\"x,y,z\";w") == ';');
  REQUIRE(pare::detect_delimiter("id") == ',');  // none at all: comma
}

TEST_CASE("ReadOptions::delimiter overrides detection", "[io]") {
  TempDir dir;
  // Two commas and two semicolons in the header: detection picks comma (ties go to comma).
  const auto path = dir.write("semi.csv", "id;x,y;z,w\ns1;1;2\n");
  REQUIRE(pare::detect_delimiter("id;x,y;z,w") == ',');
  const std::string message = error_of([&] { pare::read_table(path, options()); });
  INFO(message);
  REQUIRE(message.rfind(path + ":2:", 0) == 0);

  ReadOptions o = options();
  o.delimiter = ';';
  const FeatureTable t = pare::read_table(path, o);
  REQUIRE(t.delimiter == ';');
  REQUIRE(t.feature_names == Names{"x,y", "z,w"});
  REQUIRE(t.values(0, 0) == 1.0f);
  REQUIRE(t.values(0, 1) == 2.0f);
}

TEST_CASE("gzip input: one member, and two concatenated members", "[io]") {
  TempDir dir;
  const std::string text = "id,a,b\ns1,1,2\ns2,3,4\n";
  const auto plain = dir.write("plain.csv", text);
  const auto one = gzip_file(dir, "one.csv.gz", {text});
  const auto two = gzip_file(dir, "two.csv.gz", {"id,a,b\ns1,1,2\n", "s2,3,4\n"});

  // The two-member file really is the first member followed by a second gzip header (magic 1f 8b,
  // RFC 1952).
  const std::string first = TempDir::read(gzip_file(dir, "first.gz", {"id,a,b\ns1,1,2\n"}));
  const std::string raw = TempDir::read(two);
  REQUIRE(raw.size() > first.size());
  REQUIRE(raw.compare(0, first.size(), first) == 0);
  REQUIRE(raw.compare(first.size(), 2, "\x1f\x8b") == 0);

  REQUIRE(pare::read_file_text(one) == text);
  REQUIRE(pare::read_file_text(two) == text);
  const FeatureTable expected = pare::read_table(plain, options());
  require_same_table(pare::read_table(one, options()), expected);
  require_same_table(pare::read_table(two, options()), expected);
}

TEST_CASE("a UTF-8 byte-order mark before the header is skipped", "[io]") {
  TempDir dir;
  // The first header name is quoted and holds the delimiter: read with the mark still in front, it
  // would not start with a quote and would split into two names.
  const auto samples = dir.write("bom.csv", "\xEF\xBB\xBF\"sample, id\",a,b\ns1,1,2\n");
  const FeatureTable t = pare::read_table(samples, options());
  REQUIRE(t.feature_names == Names{"a", "b"});
  REQUIRE(t.sample_ids == Names{"s1"});

  const auto features = dir.write("bomf.csv", "\xEF\xBB\xBF\"feature, id\",s1,s2\ng1,1,2\n");
  const FeatureTable f = pare::read_table(features, options(Layout::kRowsAreFeatures));
  REQUIRE(f.sample_ids == Names{"s1", "s2"});

  const auto sheet = dir.write("bomsheet.csv", "\xEF\xBB\xBF\"sample, id\",group\ns1,A\n");
  REQUIRE(pare::read_sample_sheet(sheet).column == "group");
}

TEST_CASE("CRLF line breaks", "[io]") {
  TempDir dir;
  const auto samples = dir.write("crlf.csv", "id,a,group\r\ns1,1,A\r\ns2,2.5,B\r\n");
  ReadOptions o = options();
  o.label_column = "group";
  const FeatureTable t = pare::read_table(samples, o);
  REQUIRE(t.feature_names == Names{"a"});
  REQUIRE(t.labels == Names{"A", "B"});
  REQUIRE(t.values(1, 0) == 2.5f);

  const auto features = dir.write("crlff.csv", "feature,s1,s2\r\ng1,1,2\r\ng2,3,4\r\n");
  const FeatureTable f = pare::read_table(features, options(Layout::kRowsAreFeatures));
  REQUIRE(f.sample_ids == Names{"s1", "s2"});
  REQUIRE(f.feature_names == Names{"g1", "g2"});
  REQUIRE(f.values(1, 1) == 4.0f);
}

TEST_CASE("quoted header names with delimiters and doubled quotes", "[io]") {
  TempDir dir;
  const auto path = dir.write("q.csv", "id,\"a,b\",\"say \"\"hi\"\"\",c\ns1,1,2,3\n");
  const FeatureTable t = pare::read_table(path, options());
  REQUIRE(t.feature_names == Names{"a,b", "say \"hi\"", "c"});
  REQUIRE(t.values(0, 2) == 3.0f);
  REQUIRE(pare::split_fields("x,\"a,b\",\"\"\"\",", ',') == Names{"x", "a,b", "\"", ""});
}

TEST_CASE("cell syntax: quoted numbers, leading plus, exponents", "[io]") {
  TempDir dir;
  const auto path = dir.write("cells.csv",
                              "id,a,b,c,d\n"
                              "s1,\"1.5\",+2,-0.5e1,\"+4\"\n"
                              "s2, 7 ,+.5,1E-3,0\n");
  const FeatureTable t = pare::read_table(path, options());
  REQUIRE(t.values(0, 0) == 1.5f);
  REQUIRE(t.values(0, 1) == 2.0f);
  REQUIRE(t.values(0, 2) == -5.0f);
  REQUIRE(t.values(0, 3) == 4.0f);
  REQUIRE(t.values(1, 0) == 7.0f);  // spaces around a number are trimmed
  REQUIRE(t.values(1, 1) == 0.5f);
  REQUIRE(t.values(1, 2) == 1e-3f);
  REQUIRE(t.values(1, 3) == 0.0f);

  // Two signs, a trailing letter, a hexadecimal number: not numbers.
  for (const char* bad : {"+-1", "++1", "1.5e", "0x10", "1 2"}) {
    INFO("cell " << bad);
    const auto p = dir.write("bad.csv", std::string("id,a\ns1,") + bad + "\n");
    const std::string message = error_of([&] { pare::read_table(p, options()); });
    INFO(message);
    REQUIRE(message.rfind(p + ":2:4: cannot read", 0) == 0);
  }
}

TEST_CASE("OutputFile::write_direct writes the same bytes, whole blocks and tail", "[io]") {
  // Direct writes (whole 4 MiB blocks past the page cache) where the filesystem takes them, the
  // page cache otherwise: the file must come out byte for byte as written, in pieces of every
  // size, with a tail that is not a whole block, and after a header written before the switch.
  std::string content;
  std::mt19937_64 rng(7);
  while (content.size() < 3 * (std::size_t{4} << 20) + 12345) content += std::to_string(rng()) + ',';
  for (const bool header_first : {false, true}) {
    TempDir dir;
    const std::string path = dir.file("direct.csv");
    pare::OutputFile f(path);
    std::size_t at = 0;
    if (header_first) {
      f.write(std::string_view(content).substr(0, 5000));  // unaligned: the switch is declined
      at = 5000;
    }
    f.write_direct();
    while (at < content.size()) {
      const std::size_t piece = std::min<std::size_t>(content.size() - at, 1 + rng() % (3 << 20));
      f.write(std::string_view(content).substr(at, piece));
      at += piece;
    }
    f.commit();
    CHECK(TempDir::read(path) == content);
  }
}

TEST_CASE("plain decimals read exactly as fast_float reads them", "[io]") {
  // The reader takes plain decimals of up to 9 digits ("-12.375") without the general parser;
  // fast_float (an outside library, correctly rounded) is the reference for every cell. The cells
  // cover 1 to 12 digits, every position of the point, both signs, leading zeros, the largest
  // mantissas either side of 2^24 = 16777216, and texts the shortcut must leave to the general
  // parser ("5.", ".5", exponents).
  std::vector<std::string> cells = {"16777216", "16777217", "1677721.7", "16777215", "0.16777216", "-0",
                                    "-0.0", "0", "000123.4500", "999999999", "9999999999", "0.000000001",
                                    "123456789.5", "5.", ".5", "-.25", "1e3", "2.5E-3", "7"};
  std::mt19937_64 rng(42);
  for (int i = 0; i < 60000; ++i) {
    const int digits = 1 + static_cast<int>(rng() % 12);
    std::string text = rng() % 2 ? "-" : "";
    const int point = static_cast<int>(rng() % static_cast<std::uint64_t>(digits + 1));  // digits before it
    for (int d = 0; d < digits; ++d) {
      if (d == point && d > 0) text += '.';
      text += static_cast<char>('0' + rng() % 10);
    }
    cells.push_back(text);
  }
  std::string csv = "id";
  for (std::size_t j = 0; j < cells.size(); ++j) csv += ",f" + std::to_string(j);
  csv += "\ns1";
  for (const auto& c : cells) csv += "," + c;
  csv += "\n";
  TempDir dir;
  const FeatureTable t = pare::read_table(dir.write("plain.csv", csv), options());
  std::size_t differ = 0;
  for (std::size_t j = 0; j < cells.size(); ++j) {
    float expected = 0;
    const auto r = fast_float::from_chars(cells[j].data(), cells[j].data() + cells[j].size(), expected);
    REQUIRE(r.ec == std::errc());
    const float got = t.values(0, static_cast<Eigen::Index>(j));
    if (std::memcmp(&got, &expected, sizeof got) != 0) {
      if (++differ <= 5) UNSCOPED_INFO(cells[j] << ": read " << got << ", fast_float " << expected);
    }
  }
  CHECK(differ == 0);
}

TEST_CASE("missing tokens: empty, NA, NaN, nan, null, ? are NaN by default", "[io]") {
  TempDir dir;
  const auto path = dir.write("na.csv",
                              "id,a,b,c,d,e,f,g\n"
                              "s1,,NA,NaN,nan,null,?,\"NA\"\n"
                              "s2,1,2,3,4,5,6,\n");
  const FeatureTable t = pare::read_table(path, options());
  REQUIRE(t.n_features() == 7);
  for (Eigen::Index j = 0; j < 7; ++j) {
    INFO("column " << j);
    REQUIRE(std::isnan(t.values(0, j)));
  }
  REQUIRE(t.values(1, 5) == 6.0f);
  REQUIRE(std::isnan(t.values(1, 6)));  // a line ending in the delimiter: last field empty

  // Tokens outside the list are errors, not silently missing.
  const auto other = dir.write("other.csv", "id,a\ns1,n/a\n");
  const std::string message = error_of([&] { pare::read_table(other, options()); });
  INFO(message);
  REQUIRE(message.find("\"n/a\"") != std::string::npos);
}

TEST_CASE("custom missing tokens replace the defaults, numeric ones included", "[io]") {
  TempDir dir;
  ReadOptions o = options();
  o.na_tokens = {"-999", "."};
  const auto path = dir.write("na.csv", "id,a,b,c\ns1,-999,.,-999.5\ns2,1,2,3\n");
  const FeatureTable t = pare::read_table(path, o);
  // -999 reads as a number, yet it is on the list: missing (a sentinel for gaps in exports is
  // common practice).
  REQUIRE(std::isnan(t.values(0, 0)));
  REQUIRE(std::isnan(t.values(0, 1)));
  REQUIRE(t.values(0, 2) == -999.5f);  // tokens match as text, not as numbers
  REQUIRE(t.values(1, 0) == 1.0f);

  o.layout = Layout::kRowsAreFeatures;
  const auto features = dir.write("naf.csv", "feature,s1,s2\ng1,-999,1\n");
  const FeatureTable f = pare::read_table(features, o);
  REQUIRE(std::isnan(f.values(0, 0)));
  REQUIRE(f.values(1, 0) == 1.0f);

  // The defaults no longer apply: NA and an empty field are errors now.
  o.layout = Layout::kRowsAreSamples;
  for (const char* cell : {"NA", ""}) {
    INFO("cell '" << cell << "'");
    const auto p = dir.write("bad.csv", std::string("id,a,b\ns1,") + cell + ",1\n");
    const std::string message = error_of([&] { pare::read_table(p, o); });
    INFO(message);
    REQUIRE(message.rfind(p + ":2:4: cannot read", 0) == 0);
  }
}

TEST_CASE("inf and -inf are input errors unless allow_inf", "[io]") {
  TempDir dir;
  const auto path = dir.write("inf.csv", "id,a,b\ns1,1,inf\ns2,-inf,2\n");
  const std::string message = error_of([&] { pare::read_table(path, options()); });
  INFO(message);
  REQUIRE(message.rfind(path + ":2:6: infinite value \"inf\" in column \"b\"", 0) == 0);

  ReadOptions o = options();
  o.allow_inf = true;
  const FeatureTable t = pare::read_table(path, o);
  REQUIRE(std::isinf(t.values(0, 1)));
  REQUIRE(t.values(0, 1) > 0);
  REQUIRE(std::isinf(t.values(1, 0)));
  REQUIRE(t.values(1, 0) < 0);

  // A finite number beyond float32 (largest 3.4028235e38, IEEE 754 binary32) is not an infinity
  // the file meant: an error even with allow_inf. 3e38 still fits.
  const auto big = dir.write("big.csv", "id,a,b\ns1,3e38,-1e39\n");
  for (bool allow : {false, true}) {
    ReadOptions with = options();
    with.allow_inf = allow;
    const std::string m = error_of([&] { pare::read_table(big, with); });
    INFO("allow_inf " << allow << ": " << m);
    REQUIRE(m.rfind(big + ":2:9: value \"-1e39\" in column \"b\" is outside the float32 range",
                    0) == 0);
  }
  const auto fits = dir.write("fits.csv", "id,a\ns1,3e38\ns2,-3.4e38\n");
  const FeatureTable f = pare::read_table(fits, options());
  REQUIRE(f.values(0, 0) == 3e38f);
  REQUIRE(f.values(1, 0) == -3.4e38f);
}

TEST_CASE("label column in rows=samples and a label line in rows=features", "[io]") {
  TempDir dir;
  const auto samples = dir.write("s.csv",
                                 "id,a,group,b\n"
                                 "s1,1,wet,2\n"
                                 "s2,3,dry,4\n"
                                 "s3,5,wet,6\n");
  ReadOptions o = options();
  o.label_column = "group";
  const FeatureTable a = pare::read_table(samples, o);
  REQUIRE(a.feature_names == Names{"a", "b"});
  REQUIRE(a.labels == Names{"wet", "dry", "wet"});
  REQUIRE(a.label_name == "group");
  REQUIRE(a.values(2, 1) == 6.0f);

  // rows=features: the labels are the line whose first field is the label name, here in the middle.
  const auto features = dir.write("f.csv",
                                  "feature,s1,s2,s3\n"
                                  "a,1,3,5\n"
                                  "group,wet,dry,wet\n"
                                  "b,2,4,6\n");
  o.layout = Layout::kRowsAreFeatures;
  const FeatureTable b = pare::read_table(features, o);
  REQUIRE(b.label_name == "group");
  require_same_table(a, b);

  // Without a label option the same line is data, and "wet" is not a number: a line of text,
  // which --label names.
  const std::string message =
      error_of([&] { pare::read_table(features, options(Layout::kRowsAreFeatures)); });
  REQUIRE(message == features + ":3:7: line \"group\" holds text (\"wet\" in column \"s1\"), not numbers "
                                "(pass `label` group if it holds the classes)");
}

TEST_CASE("sample sheet FILE:COLUMN, attached by id in another order", "[io]") {
  TempDir dir;
  const auto data = dir.write("d.csv", "id,a\ns1,1\ns2,2\ns3,3\n");
  const auto sheet = dir.write("sheet.csv",
                               "sample,batch,condition\n"
                               "s3,b1,wet\n"
                               "s1,b2,dry\n"
                               "\n"
                               "s2,b1,dry\n"
                               "s9,b2,wet\n");  // not in the data: ignored
  const pare::SampleSheet s = pare::read_sample_sheet(sheet + ":condition");
  REQUIRE(s.path == sheet);
  REQUIRE(s.column == "condition");
  REQUIRE(s.ids == Names{"s3", "s1", "s2", "s9"});
  REQUIRE(s.labels == Names{"wet", "dry", "dry", "wet"});
  REQUIRE(s.lines == std::vector<std::int64_t>{2, 3, 5, 6});  // the blank line 4 is skipped

  FeatureTable t = pare::read_table(data, options());
  pare::attach_labels(t, s);
  REQUIRE(t.labels == Names{"dry", "dry", "wet"});
  REQUIRE(t.label_name == "condition");

  // Without :COLUMN the second column is used.
  const pare::SampleSheet by_default = pare::read_sample_sheet(sheet);
  REQUIRE(by_default.column == "batch");
  REQUIRE(by_default.labels == Names{"b1", "b2", "b1", "b2"});

  const std::string message = error_of([&] { pare::read_sample_sheet(sheet + ":nope"); });
  INFO(message);
  REQUIRE(message.rfind(sheet + ":1: the sample sheet has no column named \"nope\"", 0) == 0);
}

TEST_CASE("blank lines are skipped and still counted for line numbers", "[io]") {
  TempDir dir;
  const auto path = dir.write("blank.csv", "id,a\n\ns1,1\n\n\r\ns2,2\n\n");
  const FeatureTable t = pare::read_table(path, options());
  REQUIRE(t.sample_ids == Names{"s1", "s2"});
  REQUIRE(t.values(1, 0) == 2.0f);

  const auto bad = dir.write("blank-bad.csv", "id,a\n\ns1,1\n\ns2,x\n");
  const std::string message = error_of([&] { pare::read_table(bad, options()); });
  INFO(message);
  REQUIRE(message.rfind(bad + ":5:4: ", 0) == 0);
}

TEST_CASE("a header name with a quoted line break does not shift later line numbers", "[io]") {
  TempDir dir;
  // Line 1-2: header; 3: s1; 4: s2 with a bad cell.
  const auto path = dir.write("ml.csv", "id,\"a\nb\",c\ns1,1,2\ns2,x,4\n");
  const std::string message = error_of([&] { pare::read_table(path, options()); });
  INFO(message);
  REQUIRE(message.rfind(path + ":4:4: ", 0) == 0);
  const auto header_only = dir.write("ml-empty.csv", "id,\"a\nb\",c\n");
  const std::string empty = error_of([&] { pare::read_table(header_only, options()); });
  INFO(empty);
  REQUIRE(empty.rfind(header_only + ":3:1: no data lines", 0) == 0);
}

TEST_CASE("files larger than one 4 MiB chunk read bit-identically with 1 and 2 threads", "[io]") {
  TempDir dir;
  // 2400 samples x 400 features of shortest-round-trip float text: about 9.6 MB per layout, so
  // the reader (which cuts text into chunks of about 4 MiB, kChunkBytes in
  // src/internal/text_chunks.h) parses each file as three chunks.
  constexpr int kSamples = 2400, kFeatures = 400;
  std::mt19937_64 rng(20240611);  // fixed seed
  std::normal_distribution<float> normal(0.0f, 100.0f);
  pare::Matrix expected(kSamples, kFeatures);
  for (int i = 0; i < kSamples; ++i)
    for (int j = 0; j < kFeatures; ++j)
      expected(i, j) =
          (i * 7 + j) % 53 == 0 ? std::numeric_limits<float>::quiet_NaN() : normal(rng);

  auto number = [](float v) {
    if (std::isnan(v)) return std::string("NA");
    char buffer[32];
    const auto r = std::to_chars(buffer, buffer + sizeof buffer, v);  // shortest round trip
    return std::string(buffer, r.ptr);
  };
  // Built by appending pieces (also sidesteps GCC 12's false -Wrestrict on "literal" + string).
  auto append = [](std::string& out, const char* prefix, const std::string& text) {
    out += prefix;
    out += text;
  };
  std::string by_samples = "id";
  for (int j = 0; j < kFeatures; ++j) append(by_samples, ",f", std::to_string(j));
  by_samples += '\n';
  for (int i = 0; i < kSamples; ++i) {
    append(by_samples, "s", std::to_string(i));
    for (int j = 0; j < kFeatures; ++j) append(by_samples, ",", number(expected(i, j)));
    by_samples += i % 100 == 99 ? "\n\n" : "\n";  // some blank lines
  }
  std::string by_features = "feature";
  for (int i = 0; i < kSamples; ++i) append(by_features, ",s", std::to_string(i));
  by_features += '\n';
  for (int j = 0; j < kFeatures; ++j) {
    append(by_features, "f", std::to_string(j));
    for (int i = 0; i < kSamples; ++i) append(by_features, ",", number(expected(i, j)));
    by_features += '\n';
  }
  constexpr std::size_t kChunk = std::size_t{4} << 20;
  INFO("bytes: " << by_samples.size() << " by samples, " << by_features.size() << " by features");
  REQUIRE(by_samples.size() > 2 * kChunk);
  REQUIRE(by_features.size() > 2 * kChunk);
  const auto samples_path = dir.write("wide.csv", by_samples);
  const auto features_path = dir.write("wide-t.csv", by_features);
  const auto gz_path = gzip_file(dir, "wide.csv.gz", {by_samples}, 1);  // level 1: fast

  ReadOptions one = options();
  ReadOptions two = options();
  two.threads = 2;
  const FeatureTable a1 = pare::read_table(samples_path, one);
  const FeatureTable a2 = pare::read_table(samples_path, two);
  REQUIRE(a1.n_samples() == kSamples);
  REQUIRE(a1.n_features() == kFeatures);
  REQUIRE(a1.sample_ids.back() == "s" + std::to_string(kSamples - 1));
  REQUIRE(a1.feature_names.back() == "f" + std::to_string(kFeatures - 1));
  REQUIRE(same_bits(a1.values, expected));
  require_same_table(a1, a2);
  require_same_table(a1, pare::read_table(gz_path, two));

  one.layout = two.layout = Layout::kRowsAreFeatures;
  const FeatureTable b1 = pare::read_table(features_path, one);
  const FeatureTable b2 = pare::read_table(features_path, two);
  require_same_table(a1, b1);
  require_same_table(b1, b2);

  // An error in the last chunk is reported at its true line with any thread count.
  std::string broken = by_samples;
  const std::string last_id = "\ns" + std::to_string(kSamples - 1) + ",";
  const auto at = broken.rfind(last_id);
  REQUIRE(at != std::string::npos);
  broken.insert(at + last_id.size(), "x");
  const auto broken_path = dir.write("broken.csv", broken);
  // Line 1 is the header; sample i sits on line 2 + i + (blank lines before it: i / 100).
  const int line = 2 + (kSamples - 1) + (kSamples - 1) / 100;
  const std::string col = std::to_string(last_id.size());  // after "sNNNN,"
  for (int threads : {1, 2}) {
    ReadOptions o = options();
    o.threads = threads;
    const std::string message = error_of([&] { pare::read_table(broken_path, o); });
    INFO("threads " << threads << ": " << message);
    REQUIRE(message.rfind(broken_path + ":" + std::to_string(line) + ":" + col + ": column \"f0\" holds text",
                          0) == 0);
  }

  // A gzip file is parsed while it is inflated (whole chunks as they arrive, the rest when the
  // stream ends; src/io.cpp, arrive_in_chunks): the same tables in both layouts, and an error in
  // the first chunk or the last is reported exactly as for the plain file.
  require_same_table(b1, pare::read_table(gzip_file(dir, "wide-t.csv.gz", {by_features}, 1), two));
  auto same_error = [&](const std::string& text, const std::string& name, const ReadOptions& o) {
    const auto plain = dir.write(name, text);
    const auto gz = gzip_file(dir, name + ".gz", {text}, 1);
    std::string expected_message = error_of([&] { pare::read_table(plain, o); });
    REQUIRE(expected_message.rfind(plain + ":", 0) == 0);
    expected_message.replace(0, plain.size(), gz);
    REQUIRE(error_of([&] { pare::read_table(gz, o); }) == expected_message);
    return gz;
  };
  std::string broken_first = by_samples;
  broken_first.insert(broken_first.find("\ns0,") + 4, "x");
  const auto broken_first_gz = same_error(broken_first, "broken-first.csv", two);
  same_error(broken, "broken-last.csv", two);
  // A damaged stream is reported before an error in the text it did give.
  const std::string whole = TempDir::read(broken_first_gz);
  const auto cut_gz = dir.write("broken-first-cut.csv.gz", whole.substr(0, whole.size() * 2 / 3));
  REQUIRE_THAT(error_of([&] { pare::read_table(cut_gz, two); }), Catch::Matchers::Contains("gzip data ends early"));
  // rows=features: a label line near the start and a second one near the end.
  ReadOptions labelled = two;
  labelled.label_column = "group";
  std::string two_labels = by_features;
  std::string label_line = "group";
  for (int i = 0; i < kSamples; ++i) label_line += i % 2 ? ",b" : ",a";
  label_line += '\n';
  two_labels.insert(two_labels.rfind("\nf" + std::to_string(kFeatures - 1) + ",") + 1, label_line);
  two_labels.insert(two_labels.find('\n') + 1, label_line);
  same_error(two_labels, "two-labels.csv", labelled);
}

TEST_CASE("lines longer than the reader's 1 MiB window with CRLF and no final line break", "[io]") {
  // The reader copies a file's text into a buffer of 1 MiB (kWindowBytes in
  // src/internal/text_chunks.h), grown for a longer line: each line here is about 1.4 MB. The gzip
  // text (read in place) must agree.
  TempDir dir;
  constexpr int kSamples = 3, kFeatures = 200000;
  std::string text = "id";
  for (int j = 0; j < kFeatures; ++j) {
    text += ",f";
    text += std::to_string(j);
  }
  text += "\r\n";
  pare::Matrix expected(kSamples, kFeatures);
  for (int i = 0; i < kSamples; ++i) {
    text += 's';
    text += std::to_string(i);
    for (int j = 0; j < kFeatures; ++j) {
      const int v = static_cast<int>((i * 7919LL + j * 104729LL) % 20011) - 10000;  // -10000 .. 10010
      expected(i, j) = static_cast<float>(v) / 100.0f;        // what "-12.34" parses to
      char cell[16];
      std::snprintf(cell, sizeof cell, ",%s%d.%02d", v < 0 ? "-" : "", std::abs(v) / 100, std::abs(v) % 100);
      text += cell;
    }
    if (i + 1 < kSamples) text += "\r\n";  // the last line has no line break
  }
  REQUIRE(text.size() / kSamples > (std::size_t{1} << 20));
  const auto path = dir.write("long.csv", text);
  ReadOptions two = options();
  two.threads = 2;
  const FeatureTable t = pare::read_table(path, two);
  REQUIRE(t.n_samples() == kSamples);
  REQUIRE(t.n_features() == kFeatures);
  REQUIRE(t.sample_ids.back() == "s2");
  REQUIRE(same_bits(t.values, expected));
  require_same_table(t, pare::read_table(gzip_file(dir, "long.csv.gz", {text}, 1), two));

  // A bad cell near the end of the second line: its line and column as in the file.
  std::string broken = text;
  const auto second_end = broken.find("\r\n", broken.find("\r\ns1,") + 2);
  broken.insert(second_end - 1, "x");
  const auto broken_path = dir.write("long-broken.csv", broken);
  const std::size_t line_start = broken.rfind('\n', second_end) + 1;
  const std::size_t cell_start = broken.rfind(',', second_end) + 1;
  const std::string where = broken_path + ":3:" + std::to_string(cell_start - line_start + 1) + ": ";
  const std::string message = error_of([&] { pare::read_table(broken_path, two); });
  INFO(message);
  REQUIRE(message.rfind(where, 0) == 0);
}

TEST_CASE("duplicate feature names are made unique, the same way in both layouts", "[io]") {
  TempDir dir;
  // "a" three times and an "a#2" of the file's own: the first "a" keeps its name, the next gets
  // a#3 (a#2 is taken by the file), the last a#4; "a#2" itself is not a repeat.
  const auto samples = dir.write("dup.csv",
                                 "id,a,b,a,a#2,a\n"
                                 "s1,1,2,3,4,5\n"
                                 "s2,6,7,8,9,10\n");
  const auto features = dir.write("dup-f.csv",
                                  "feature,s1,s2\n"
                                  "a,1,6\n"
                                  "b,2,7\n"
                                  "a,3,8\n"
                                  "a#2,4,9\n"
                                  "a,5,10\n");
  const FeatureTable a = pare::read_table(samples, options());
  REQUIRE(a.feature_names == Names{"a", "b", "a#3", "a#2", "a#4"});
  using Renamed = std::vector<std::pair<std::int64_t, std::string>>;
  REQUIRE(a.renamed == Renamed{{2, "a"}, {4, "a"}});
  REQUIRE(a.values(1, 4) == 10.0f);
  ReadOptions by_features = options(Layout::kRowsAreFeatures);
  const FeatureTable b = pare::read_table(features, by_features);
  require_same_table(a, b);
  REQUIRE(b.renamed == a.renamed);
  // Streamed gzip and two threads: the same names.
  by_features.threads = 2;
  const auto gz = gzip_file(dir, "dup-f.csv.gz", {TempDir::read(features)});
  const FeatureTable c = pare::read_table(gz, by_features);
  require_same_table(a, c);
  REQUIRE(c.renamed == a.renamed);
  // Quoted names and CRLF: the name as written is the unquoted one.
  const auto quoted = dir.write("dup-q.csv", "id,\"x,y\",\"x,y\"\r\ns1,1,2\r\n");
  const FeatureTable q = pare::read_table(quoted, options());
  REQUIRE(q.feature_names == Names{"x,y", "x,y#2"});
  REQUIRE(q.renamed == Renamed{{1, "x,y"}});
  // No repeats: nothing renamed.
  REQUIRE(pare::read_table(dir.write("plain.csv", "id,a,b\ns1,1,2\n"), options()).renamed.empty());
}

TEST_CASE("a missing label is no label: label column, label line, sample sheet", "[io]") {
  TempDir dir;
  // rows=samples: NA and an empty field (both default missing tokens) are read as "".
  const auto samples = dir.write("s.csv", "id,a,group\ns1,1,A\ns2,2,NA\ns3,3,\ns4,4,B\n");
  ReadOptions o = options();
  o.label_column = "group";
  const FeatureTable a = pare::read_table(samples, o);
  REQUIRE(a.labels == Names{"A", "", "", "B"});
  // rows=features: the label line.
  const auto features = dir.write("f.csv", "feature,s1,s2,s3,s4\ngroup,A,NA,,B\na,1,2,3,4\n");
  o.layout = Layout::kRowsAreFeatures;
  const FeatureTable b = pare::read_table(features, o);
  require_same_table(a, b);
  // The read's own tokens decide: with --na "-", "-" is no label and "NA" is a class named NA.
  ReadOptions custom = options();
  custom.label_column = "group";
  custom.na_tokens = {"-"};
  const auto dashes = dir.write("dash.csv", "id,a,group\ns1,1,A\ns2,2,-\ns3,3,NA\n");
  REQUIRE(pare::read_table(dashes, custom).labels == Names{"A", "", "NA"});

  // A sheet row whose label is a default missing token gives "" for that sample.
  const auto sheet = dir.write("sheet.csv", "sample,group,batch\ns1,A,b1\ns2,NA,b2\ns3,,NA\n");
  const pare::SampleSheet s = pare::read_sample_sheet(sheet);
  REQUIRE(s.labels == Names{"A", "", ""});
  const auto data = dir.write("d.csv", "id,a\ns3,1\ns1,2\ns2,3\n");
  FeatureTable t = pare::read_table(data, options());
  pare::attach_labels(t, s);
  REQUIRE(t.labels == Names{"", "A", ""});
  // A sample the sheet does not list is still an error.
  const auto data4 = dir.write("d4.csv", "id,a\ns1,1\ns2,2\ns4,3\n");
  FeatureTable t4 = pare::read_table(data4, options());
  REQUIRE(error_of([&] { pare::attach_labels(t4, s); }) ==
          sheet + ": 1 of 3 samples of " + data4 +
              " are not in the sample sheet: \"s4\" (add them to the sheet or remove them from the data)");
}

TEST_CASE("a sample sheet keeps every column; sheet_column_values", "[io]") {
  TempDir dir;
  const auto sheet = dir.write("sheet.tsv",
                               "sample\tgroup\tbatch\r\n"
                               "s1\tA\tb1\r\n"
                               "\r\n"
                               "s2\tB\t\"b,2\"\r\n"
                               "s3\tA\tNA\r\n");
  const pare::SampleSheet s = pare::read_sample_sheet(sheet);
  REQUIRE(s.header == Names{"sample", "group", "batch"});
  REQUIRE(s.cells == std::vector<Names>{{"s1", "A", "b1"}, {"s2", "B", "b,2"}, {"s3", "A", "NA"}});
  // Per sample id, in the order asked; "" for a missing token and for an id the sheet lacks.
  REQUIRE(pare::sheet_column_values(s, "batch", {"s3", "s1", "x9", "s2"}) == Names{"", "b1", "", "b,2"});
  REQUIRE(pare::sheet_column_values(s, "group", {"s2", "s1"}) == Names{"B", "A"});
  REQUIRE(pare::sheet_column_values(s, "sample", {"s2", "x9"}) == Names{"s2", ""});
  REQUIRE(error_of([&] { pare::sheet_column_values(s, "site", {"s1"}); }) ==
          sheet + ":1: the sample sheet has no column named \"site\" (the header has: \"sample\", \"group\", \"batch\")");
  // A value that is not UTF-8 text is refused where it is used, at its line.
  const auto latin1 = dir.write("latin1.csv", "sample,group,site\ns1,A,ok\ns2,B,K\xF6ln\n");
  const pare::SampleSheet l = pare::read_sample_sheet(latin1);
  REQUIRE(pare::sheet_column_values(l, "group", {"s1", "s2"}) == Names{"A", "B"});
  const std::string message = error_of([&] { pare::sheet_column_values(l, "site", {"s1", "s2"}); });
  REQUIRE(message.rfind(latin1 + ":3:1: value \"K", 0) == 0);
  REQUIRE_THAT(message, Catch::Matchers::Contains("in column \"site\" is not valid UTF-8"));
}

TEST_CASE("a text cell names its column and the option that takes it", "[io]") {
  TempDir dir;
  // rows=samples: "s1,1," is 5 bytes, so the text starts at column 6.
  const auto samples = dir.write("text.csv", "id,a,batch\ns1,1,plate1\ns2,2,plate2\n");
  REQUIRE(error_of([&] { pare::read_table(samples, options()); }) ==
          samples + ":2:6: column \"batch\" holds text (\"plate1\" on line 2), not numbers (pass `label` batch if "
                    "it holds the classes, or `sample_info` batch to carry it into samples.tsv)");
  // rows=features: a text column of the header is an annotation column.
  const auto features = dir.write("text-f.csv", "feature,s1,symbol,s2\ng1,1,TP53,2\ng2,3,MYC,4\n");
  REQUIRE(error_of([&] { pare::read_table(features, options(Layout::kRowsAreFeatures)); }) ==
          features + ":2:6: column \"symbol\" holds text (\"TP53\" on line 2), not numbers (pass `feature_info` "
                     "symbol if it describes the features, e.g. gene symbols or chromosomes)");
  // Text further down a column of numbers is a stray cell, not a text column: the old message.
  const auto stray = dir.write("stray-f.csv", "feature,s1,s2\ng1,1,2\ng2,abc,3\n");
  REQUIRE(error_of([&] { pare::read_table(stray, options(Layout::kRowsAreFeatures)); }) ==
          stray + ":3:4: cannot read \"abc\" in column \"g2\" as a number (missing values must be one of: an empty "
                  "field, ?, NA, NaN, nan, null; `na` sets the list)");
  // A number-shaped bad cell, or a gap spelled in a way --na does not list, keeps the old message.
  const std::string hint = " as a number (missing values must be one of: an empty field, ?, NA, NaN, nan, null; "
                           "`na` sets the list)";
  const auto number = dir.write("number.csv", "id,a\ns1,1.2.3\n");
  REQUIRE(error_of([&] { pare::read_table(number, options()); }) ==
          number + ":2:4: cannot read \"1.2.3\" in column \"a\"" + hint);
  const auto gap = dir.write("gap.csv", "id,a\ns1,N/A\n");
  REQUIRE(error_of([&] { pare::read_table(gap, options()); }) == gap + ":2:4: cannot read \"N/A\" in column \"a\"" + hint);
  const auto none = dir.write("none.csv", "id,a\ns1,-none\n");
  REQUIRE(error_of([&] { pare::read_table(none, options()); }) ==
          none + ":2:4: cannot read \"-none\" in column \"a\"" + hint);
  ReadOptions custom = options();
  custom.na_tokens = {"-999"};
  const auto na = dir.write("na.csv", "id,a\ns1,NA\n");
  REQUIRE(error_of([&] { pare::read_table(na, custom); }) ==
          na + ":2:4: cannot read \"NA\" in column \"a\" as a number (missing values must be one of: -999; `na` "
               "sets the list)");
}

TEST_CASE("io: --feature-info and --sample-info: text columns in either layout", "[io]") {
  TempDir dir;
  // rows=features, CRLF, quoted names with the delimiter; the annotation columns sit anywhere
  // after the id, the label line has fields under them (ignored).
  const std::string by_features =
      "feature,\"gene, symbol\",s1,s2,chrom\r\n"
      "g1,\"TP53, mutant\",1,2,chr17\r\n"
      "group,x,A,NA,y\r\n"
      "g2,MYC,3,4,chr8\r\n";
  ReadOptions o = options(Layout::kRowsAreFeatures);
  o.label_column = "group";
  o.feature_info = {"chrom", "gene, symbol"};
  const auto path = dir.write("info-f.csv", by_features);
  const FeatureTable f = pare::read_table(path, o);
  REQUIRE(f.sample_ids == Names{"s1", "s2"});
  REQUIRE(f.feature_names == Names{"g1", "g2"});
  REQUIRE(f.labels == Names{"A", ""});
  REQUIRE(f.feature_info_names == Names{"chrom", "gene, symbol"});
  REQUIRE(f.feature_info == std::vector<Names>{{"chr17", "chr8"}, {"TP53, mutant", "MYC"}});
  REQUIRE(f.values(0, 0) == 1.0f);
  REQUIRE(f.values(1, 0) == 2.0f);
  REQUIRE(f.values(0, 1) == 3.0f);
  REQUIRE(f.values(1, 1) == 4.0f);
  REQUIRE(f.sample_info.empty());
  // The same as a streamed gzip file with two threads, and on disk (--memory).
  ReadOptions two = o;
  two.threads = 2;
  const FeatureTable g = pare::read_table(gzip_file(dir, "info-f.csv.gz", {by_features}), two);
  require_same_table(f, g);
  REQUIRE(g.feature_info == f.feature_info);
  ReadOptions disk = o;
  disk.memory.bytes = 4;
  disk.memory.cache_dir = dir.path();
  const FeatureTable h = pare::read_table(path, disk);
  REQUIRE(h.values.on_disk());
  require_same_table(f, h);
  REQUIRE(h.feature_info == f.feature_info);

  // rows=samples: text columns per sample, in the order given.
  const std::string by_samples =
      "sample,batch,g1,group,g2,site\r\n"
      "s1,\"p,1\",1,A,3,x\r\n"
      "s2,p2,2,NA,4,\r\n";
  ReadOptions s = options();
  s.label_column = "group";
  s.sample_info = {"site", "batch"};
  const FeatureTable a = pare::read_table(dir.write("info-s.csv", by_samples), s);
  require_same_table(f, a);
  REQUIRE(a.sample_info_names == Names{"site", "batch"});
  REQUIRE(a.sample_info == std::vector<Names>{{"x", ""}, {"p,1", "p2"}});
  REQUIRE(a.feature_info.empty());
  s.threads = 2;
  const FeatureTable b = pare::read_table(gzip_file(dir, "info-s.csv.gz", {by_samples}), s);
  require_same_table(a, b);
  REQUIRE(b.sample_info == a.sample_info);

  // A text cell that is not UTF-8 is refused at its place: "g1," is 3 bytes.
  const auto latin1 = dir.write("latin1.csv", "feature,symbol,s1\ng1,K\xF6ln,1\n");
  ReadOptions l = options(Layout::kRowsAreFeatures);
  l.feature_info = {"symbol"};
  const std::string message = error_of([&] { pare::read_table(latin1, l); });
  REQUIRE(message.rfind(latin1 + ":2:4: value \"K", 0) == 0);
  REQUIRE_THAT(message, Catch::Matchers::Contains("in column \"symbol\" is not valid UTF-8"));
  // Only text columns: no samples left.
  const auto only = dir.write("only.csv", "feature,symbol\ng1,TP53\n");
  REQUIRE(error_of([&] { pare::read_table(only, l); }) ==
          only + ":1: the header names no sample columns (with `layout` rows=features the header lists the "
                 "sample ids)");
}

TEST_CASE("io: --feature-info and --sample-info: each mistake gets its own message", "[io]") {
  TempDir dir;
  // Checked before the file is opened: usage errors, even for a file that does not exist.
  const std::string absent = dir.file("absent.csv");
  ReadOptions wrong_layout = options();
  wrong_layout.feature_info = {"symbol"};
  REQUIRE(error_of([&] { pare::read_table(absent, wrong_layout); }, pare::ErrorKind::kUsage) ==
          "`feature_info` is for `layout` rows=features (a feature per line) (with rows=samples, text columns "
          "describing the samples are `sample_info` COLUMNS)");
  ReadOptions wrong_layout_f = options(Layout::kRowsAreFeatures);
  wrong_layout_f.sample_info = {"batch"};
  REQUIRE(error_of([&] { pare::read_table(absent, wrong_layout_f); }, pare::ErrorKind::kUsage) ==
          "`sample_info` is for `layout` rows=samples (a sample per line) (with rows=features, text columns "
          "describing the features are `feature_info` COLUMNS)");
  ReadOptions twice = options(Layout::kRowsAreFeatures);
  twice.feature_info = {"symbol", "chrom", "symbol"};
  REQUIRE(error_of([&] { pare::read_table(absent, twice); }, pare::ErrorKind::kUsage) ==
          "`feature_info` names \"symbol\" twice (give each column once)");
  ReadOptions label = options();
  label.label_column = "group";
  label.sample_info = {"batch", "group"};
  REQUIRE(error_of([&] { pare::read_table(absent, label); }, pare::ErrorKind::kUsage) ==
          "`sample_info` names \"group\", the `label` column (it is carried already; leave it out of "
          "`sample_info`)");
  ReadOptions empty = options();
  empty.sample_info = {"batch", ""};
  REQUIRE(error_of([&] { pare::read_table(absent, empty); }, pare::ErrorKind::kUsage) ==
          "`sample_info` has an empty column name (give comma-separated header names)");

  // Against the header: input errors.
  const auto features = dir.write("f.csv", "feature,symbol,s1,s2\ng1,TP53,1,2\n");
  ReadOptions unknown = options(Layout::kRowsAreFeatures);
  unknown.feature_info = {"symbol", "chrom"};
  REQUIRE(error_of([&] { pare::read_table(features, unknown); }) ==
          features + ":1: no column named \"chrom\" for `feature_info` (the header has: \"feature\", \"symbol\", "
                     "\"s1\", \"s2\")");
  ReadOptions id = options(Layout::kRowsAreFeatures);
  id.feature_info = {"feature"};
  REQUIRE(error_of([&] { pare::read_table(features, id); }) ==
          features + ":1:1: `feature_info` names \"feature\", the id column (the first column holds the ids; name "
                     "only text columns after it)");
  const auto samples = dir.write("s.csv", "sample,a,batch\ns1,1,p1\n");
  ReadOptions unknown_s = options();
  unknown_s.sample_info = {"site"};
  REQUIRE(error_of([&] { pare::read_table(samples, unknown_s); }) ==
          samples + ":1: no column named \"site\" for `sample_info` (the header has: \"sample\", \"a\", \"batch\")");
  ReadOptions id_s = options();
  id_s.sample_info = {"sample"};
  REQUIRE(error_of([&] { pare::read_table(samples, id_s); }) ==
          samples + ":1:1: `sample_info` names \"sample\", the id column (the first column holds the ids; name "
                    "only text columns after it)");
}
