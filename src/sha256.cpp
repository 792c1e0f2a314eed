#include "internal/sha256.h"

#include <openssl/evp.h>

#include <cstring>  // std::strerror
#include <filesystem>  // std::filesystem::is_regular_file
#include <fstream>  // std::ifstream
#include <vector>   // std::vector

#include "pare/error.h"

namespace pare::internal {

namespace {

std::string to_hex(const unsigned char* digest, unsigned int length) {
  static constexpr char kHex[] = "0123456789abcdef";
  std::string out;
  out.reserve(2 * length);
  for (unsigned int i = 0; i < length; ++i) {
    out += kHex[digest[i] >> 4];
    out += kHex[digest[i] & 15];
  }
  return out;
}

}  // namespace

Sha256::Sha256() : ctx_(EVP_MD_CTX_new()) {
  if (!ctx_ || EVP_DigestInit_ex(static_cast<EVP_MD_CTX*>(ctx_), EVP_sha256(), nullptr) != 1) {
    EVP_MD_CTX_free(static_cast<EVP_MD_CTX*>(ctx_));
    throw Error(ErrorKind::kOther, "SHA-256 computation failed");
  }
}

Sha256::~Sha256() { EVP_MD_CTX_free(static_cast<EVP_MD_CTX*>(ctx_)); }

void Sha256::update(std::string_view bytes) { EVP_DigestUpdate(static_cast<EVP_MD_CTX*>(ctx_), bytes.data(), bytes.size()); }

std::string Sha256::hex() {
  unsigned char digest[EVP_MAX_MD_SIZE];
  unsigned int length = 0;
  EVP_DigestFinal_ex(static_cast<EVP_MD_CTX*>(ctx_), digest, &length);
  return to_hex(digest, length);
}

std::string sha256_hex(std::string_view bytes) {
  Sha256 hash;
  hash.update(bytes);
  return hash.hex();
}

std::string sha256_file(const std::string& path) {
  // Inputs are read twice (hashed, then parsed), so they must be regular files: a pipe would be
  // split between the two readers and a device such as /dev/zero never ends.
  std::error_code ec;
  if (!std::filesystem::is_regular_file(path, ec))
    throw_input_error({path}, std::filesystem::exists(path, ec) ? "is not a regular file" : "cannot open the file",
                      std::filesystem::exists(path, ec) ? "give the path of a data file (a pipe or a device cannot be read twice)"
                                                        : "check the path");
  std::ifstream in(path, std::ios::binary);
  if (!in) throw_input_error({path}, std::string("cannot open the file: ") + std::strerror(errno));
  Sha256 hash;
  std::vector<char> buffer(std::size_t{1} << 20);
  while (in) {
    in.read(buffer.data(), static_cast<std::streamsize>(buffer.size()));
    const auto got = in.gcount();
    if (got > 0) hash.update(std::string_view(buffer.data(), static_cast<std::size_t>(got)));
  }
  if (in.bad()) throw_input_error({path}, "cannot read the file");
  return hash.hex();
}

}  // namespace pare::internal
