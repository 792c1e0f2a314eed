// SHA-256 (OpenSSL's implementation) as lower-case hex.
#pragma once

#include <string>       // std::string
#include <string_view>  // std::string_view

namespace pare::internal {

/// Hex SHA-256 digest of `bytes`.
std::string sha256_hex(std::string_view bytes);

/// SHA-256 of bytes given piece by piece.
class Sha256 {
 public:
  Sha256();
  Sha256(const Sha256&) = delete;
  Sha256& operator=(const Sha256&) = delete;
  ~Sha256();
  void update(std::string_view bytes);
  /// The digest in lower-case hex (once, at the end).
  std::string hex();

 private:
  void* ctx_;  // EVP_MD_CTX
};

}  // namespace pare::internal

namespace pare::internal {

/// Hex SHA-256 digest of the file at `path`, read in chunks. Throws Error(kInput) if unreadable.
std::string sha256_file(const std::string& path);

}  // namespace pare::internal
