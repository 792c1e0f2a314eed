// The text of an input file (src/internal/input_text.h): a plain file mapped, a pipe read, a gzip
// file inflated while it is read (streaming) or into a cache file (with a memory budget).
// Compressed files are made by Python's gzip module (Debian's /usr/bin/python3), not by pare, so
// inflating is checked against an independent compressor: the text must come back byte for byte.
#include "internal/input_text.h"

#include <sys/stat.h>  // mkfifo
#include <unistd.h>    // truncate

#include <cstdint>  // std::uint64_t
#include <fstream>  // std::ofstream
#include <random>   // std::mt19937_64
#include <string>   // std::string
#include <thread>   // std::thread
#include <vector>   // std::vector

#include <catch2/catch.hpp>

#include "pare/error.h"

#include "support/python_reference.h"
#include "support/temp_dir.h"

namespace {

using pare::internal::InputText;
using pare::test::TempDir;

// A CSV-like text of about `bytes` bytes: lines of numbers of varying length, so that line
// breaks fall at every offset of the inflater's steps.
std::string table_text(std::size_t bytes, std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::string out = "id,a,b,c\n";
  for (int line = 0; out.size() < bytes; ++line) {
    out += 's';
    out += std::to_string(line);
    const int fields = 3 + static_cast<int>(rng() % 40);
    for (int f = 0; f < fields; ++f) {
      out += ',';
      out += std::to_string(rng() % 1000000);
      out += '.';
      out += std::to_string(rng() % 97);
    }
    out += '\n';
  }
  return out;
}

// Compresses `plain` (one gzip member per path in `members`, concatenated) with Python's gzip
// module into `out`; false when python3 cannot run (the test is then skipped).
bool python_gzip(const TempDir& dir, const std::vector<std::string>& members,
                 const std::string& out, const char* options = "") {
  std::vector<std::string> args{out};
  args.insert(args.end(), members.begin(), members.end());
  const auto done = pare::test::python_output(
      dir,
      std::string("import gzip, sys\n"
                  "with open(sys.argv[1], 'wb') as out:\n"
                  "    for path in sys.argv[2:]:\n"
                  "        out.write(gzip.compress(open(path, 'rb').read()") +
          options + "))\n",
      args);
  return done.has_value();
}

}  // namespace

TEST_CASE("input text: a plain file is mapped whole, not streamed", "[input_text]") {
  TempDir dir;
  const std::string text = table_text(300'000, 1);
  const InputText input = InputText::open(dir.write("plain.csv", text));
  CHECK_FALSE(input.streaming());
  CHECK(input.expected_size() == text.size());
  CHECK(input.view() == text);
  bool complete = false;
  CHECK(input.wait_for(text.size() + 1, complete) == text);
  CHECK(complete);
  // Giving back pages of a mapped file loses nothing: they are read again from the file.
  input.release(input.view().data(), input.view().data() + input.view().size(), true);
  CHECK(input.view() == text);
  // An empty file is an empty text.
  const InputText empty = InputText::open(dir.write("empty.csv", ""));
  CHECK(empty.view().empty());
  CHECK(empty.expected_size() == 0);
}

TEST_CASE("input text: read_at copies parts of a file; a file that shrank is an input error", "[input_text]") {
  TempDir dir;
  const std::string text = table_text(300'000, 4);
  const std::string path = dir.write("parts.csv", text);
  const InputText input = InputText::open(path);
  REQUIRE(input.readable_at());
  const char* base = input.view().data();
  std::string part(1000, '\0');
  for (const std::size_t at : {std::size_t{0}, std::size_t{4095}, text.size() - 1000}) {
    input.read_at(base + at, part.size(), part.data());
    CHECK(part == text.substr(at, part.size()));
  }
  // Cut after it was opened: reading past the new end fails, with a message rather than a crash.
  REQUIRE(::truncate(path.c_str(), 1000) == 0);
  input.read_at(base, 1000, part.data());
  CHECK(part == text.substr(0, 1000));
  try {
    input.read_at(base + 500, 1000, part.data());
    FAIL("no error");
  } catch (const pare::Error& e) {
    CHECK(e.kind() == pare::ErrorKind::kInput);
    CHECK(std::string(e.what()).find("became shorter") != std::string::npos);
  }
  // A pipe's text, read into memory, has no file behind it.
  const std::string fifo = dir.file("fifo-parts");
  REQUIRE(::mkfifo(fifo.c_str(), 0600) == 0);
  std::thread writer([&] { std::ofstream(fifo, std::ios::binary) << "id,a\ns1,1\n"; });
  const InputText piped = InputText::open(fifo);
  writer.join();
  CHECK_FALSE(piped.readable_at());
}

TEST_CASE("input text: a pipe is read to its end", "[input_text]") {
  TempDir dir;
  const std::string text = table_text(5'000'000, 2);  // more than one 2 MiB step of the reader
  const std::string fifo = dir.file("fifo");
  REQUIRE(::mkfifo(fifo.c_str(), 0600) == 0);
  std::thread writer([&] {
    std::ofstream out(fifo, std::ios::binary);
    out.write(text.data(), static_cast<std::streamsize>(text.size()));
  });
  const InputText input = InputText::open(fifo);
  writer.join();
  CHECK_FALSE(input.streaming());
  CHECK(input.view() == text);
}

TEST_CASE("input text: gzip is inflated as it is read; what has arrived never moves",
          "[input_text]") {
  TempDir dir;
  // 14 MB of text: several of the inflater's steps of about 4 MiB.
  const std::string text = table_text(14'000'000, 3);
  const std::string gz = dir.file("t.csv.gz");
  if (!python_gzip(dir, {dir.write("t.csv", text)}, gz)) return;
  const InputText input = InputText::open(gz);
  REQUIRE(input.streaming());
  CHECK(input.expected_size() == text.size());  // the gzip trailer's ISIZE
  const char* first = nullptr;
  std::size_t have = 0;
  for (std::size_t want = 1;; want += 3'000'017) {
    bool complete = false;
    const std::string_view part = input.wait_for(want, complete);
    INFO("asked for " << want << ", got " << part.size());
    CHECK((part.size() >= want || complete));
    CHECK(part.size() >= have);  // only grows
    CHECK(part == std::string_view(text).substr(0, part.size()));
    if (!first) first = part.data();
    CHECK(part.data() == first);
    have = part.size();
    if (complete) break;
  }
  CHECK(have == text.size());
  CHECK(input.view() == text);
  CHECK(input.view().data() == first);
}

TEST_CASE("input text: concatenated gzip members are one text", "[input_text]") {
  TempDir dir;
  const std::string a = table_text(1'000'000, 4), b = table_text(6'000'000, 5), c = "s,1,2,3\n";
  const std::string gz = dir.file("three.csv.gz");
  if (!python_gzip(dir, {dir.write("a", a), dir.write("b", b), dir.write("c", c)}, gz)) return;
  CHECK(InputText::open(gz).view() == a + b + c);
  // The same file with a memory budget: inflated into a cache file and mapped.
  pare::MemoryBudget budget;
  budget.bytes = 1 << 20;
  budget.cache_dir = dir.path();
  const InputText cached = InputText::open(gz, budget);
  CHECK_FALSE(cached.streaming());
  CHECK(cached.view() == a + b + c);
  // Its pages can be given back and are read again from the cache file.
  cached.release(cached.view().data(), cached.view().data() + cached.view().size(), false);
  CHECK(cached.view() == a + b + c);
}

TEST_CASE("input text: a truncated gzip file ends the stream quietly and fails in view",
          "[input_text]") {
  TempDir dir;
  const std::string text = table_text(10'000'000, 6);
  const std::string gz = dir.file("whole.csv.gz");
  if (!python_gzip(dir, {dir.write("t.csv", text)}, gz, ", compresslevel=1")) return;
  std::string bytes = TempDir::read(gz);
  bytes.resize(bytes.size() * 2 / 3);
  const std::string cut = dir.write("cut.csv.gz", bytes);
  const InputText input = InputText::open(cut);
  REQUIRE(input.streaming());
  bool complete = false;
  const std::string_view part = input.wait_for(text.size(), complete);  // never throws
  CHECK(complete);
  CHECK(part.size() < text.size());
  CHECK(part == std::string_view(text).substr(0, part.size()));
  try {
    (void)input.view();
    FAIL("a truncated gzip file was read whole");
  } catch (const pare::Error& e) {
    CHECK(e.kind() == pare::ErrorKind::kInput);
    CHECK(std::string(e.what()).rfind(cut + ": ", 0) == 0);
  }
  // With a memory budget the file is inflated before open returns, so open reports it.
  pare::MemoryBudget budget;
  budget.bytes = 1 << 20;
  budget.cache_dir = dir.path();
  CHECK_THROWS_AS(InputText::open(cut, budget), pare::Error);
}

TEST_CASE("input text: what cannot be opened is an input error", "[input_text]") {
  TempDir dir;
  const auto message_of = [](const std::string& path) {
    try {
      (void)InputText::open(path);
    } catch (const pare::Error& e) {
      CHECK(e.kind() == pare::ErrorKind::kInput);
      return std::string(e.what());
    }
    FAIL("no pare::Error for " << path);
    return std::string();
  };
  const std::string missing = dir.file("absent.csv");
  CHECK(message_of(missing) ==
        missing + ": cannot open the file: No such file or directory (check the path)");
  CHECK(message_of(dir.path()) ==
        dir.path() + ": is a folder, not a file (give the path of a data file)");
  CHECK(message_of("/dev/zero") ==
        "/dev/zero: is not a regular file (give the path of a data file)");
}
