// SHA-256 (src/internal/sha256.h): the digests plan.json records for each input file and for the
// loadings file, checked against published test vectors and against Python's hashlib.
#include "internal/sha256.h"

#include <sys/stat.h>  // mkfifo

#include <cstdint>  // std::uint64_t
#include <random>   // std::mt19937_64
#include <sstream>  // std::istringstream
#include <string>   // std::string
#include <vector>   // std::vector

#include <catch2/catch.hpp>

#include "pare/error.h"

#include "support/python_reference.h"
#include "support/temp_dir.h"

namespace {

using pare::internal::Sha256;
using pare::internal::sha256_file;
using pare::internal::sha256_hex;
using pare::test::TempDir;

const std::string kMessage448 = "abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq";

// Bytes of every value 0-255, in a fixed pseudo-random order (std::mt19937_64 is specified by the
// C++ standard, so the bytes are the same everywhere).
std::string random_bytes(std::size_t size, std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::string out(size, '\0');
  for (auto& c : out) c = static_cast<char>(rng() & 0xFF);
  return out;
}

}  // namespace

TEST_CASE("sha256: the test vectors of FIPS 180-2", "[sha256]") {
  // FIPS PUB 180-2 (NIST, 2002), Appendix B: B.1 "abc", B.2 the 448-bit message, B.3 one million
  // 'a'. Digests recalled from memory; the hashlib test below computes them again at test time.
  CHECK(sha256_hex("abc") == "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
  CHECK(sha256_hex(kMessage448) ==
        "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1");
  CHECK(sha256_hex(std::string(1'000'000, 'a')) ==
        "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0");
  // The empty message: the digest published with SHA-256 test suites (e.g. NIST's CAVP byte
  // vectors, Len = 0), recalled from memory and computed again by hashlib below.
  CHECK(sha256_hex("") == "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855");
}

TEST_CASE("sha256: a message given in pieces has the digest of the whole", "[sha256]") {
  const std::string million(1'000'000, 'a');
  const std::string whole = sha256_hex(million);
  Sha256 pieces;
  for (std::size_t i = 0; i < million.size(); i += 997)  // pieces that straddle the 64-byte blocks
    pieces.update(std::string_view(million).substr(i, 997));
  CHECK(pieces.hex() == whole);
  // The 448-bit message split at every byte: one piece, then the other.
  for (std::size_t cut = 0; cut <= kMessage448.size(); ++cut) {
    Sha256 two;
    two.update(std::string_view(kMessage448).substr(0, cut));
    two.update(std::string_view(kMessage448).substr(cut));
    INFO("cut at " << cut);
    CHECK(two.hex() == sha256_hex(kMessage448));
  }
}

TEST_CASE("sha256: files and strings agree with Python's hashlib", "[sha256]") {
  TempDir dir;
  // Files around sha256_file's 1 MiB read: empty, one byte, exactly 1 MiB, and 3 MiB + 17 bytes
  // of every byte value; plus the vectors above written to files.
  const std::vector<std::string> files = {
      dir.write("empty", ""),
      dir.write("one", "a"),
      dir.write("mib", random_bytes(std::size_t{1} << 20, 1)),
      dir.write("long", random_bytes((std::size_t{3} << 20) + 17, 2)),
      dir.write("abc", "abc"),
      dir.write("448", kMessage448),
      dir.write("million", std::string(1'000'000, 'a')),
  };
  // Reference: Python 3's hashlib (Debian's /usr/bin/python3), sha256 of each file's bytes.
  const auto reference =
      pare::test::python_output(dir,
                                "import hashlib, sys\n"
                                "for path in sys.argv[1:]:\n"
                                "    print(hashlib.sha256(open(path, 'rb').read()).hexdigest())\n",
                                files);
  if (!reference) return;
  std::istringstream lines(*reference);
  for (const auto& path : files) {
    std::string expected;
    std::getline(lines, expected);
    INFO(path);
    CHECK(sha256_file(path) == expected);
    CHECK(sha256_hex(TempDir::read(path)) == expected);
  }
}

TEST_CASE("sha256: what cannot be hashed is an input error naming the path", "[sha256]") {
  TempDir dir;
  const auto message_of = [](const std::string& path) {
    try {
      sha256_file(path);
    } catch (const pare::Error& e) {
      CHECK(e.kind() == pare::ErrorKind::kInput);
      return std::string(e.what());
    }
    FAIL("no pare::Error for " << path);
    return std::string();
  };
  const std::string missing = dir.file("absent.csv");
  CHECK(message_of(missing) == missing + ": cannot open the file (check the path)");
  CHECK(message_of(dir.path()) ==
        dir.path() +
            ": is not a regular file (give the path of a data file (a pipe or a "
            "device cannot be read twice))");
  const std::string fifo = dir.file("fifo");
  REQUIRE(::mkfifo(fifo.c_str(), 0600) == 0);
  CHECK(message_of(fifo).rfind(fifo + ": is not a regular file", 0) ==
        0);  // never opened, so no hang
}
