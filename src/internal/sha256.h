// SHA-256 (OpenSSL's implementation) as lower-case hex.
#pragma once

#include <string>       // std::string
#include <string_view>  // std::string_view

namespace pare::internal {

/// Hex SHA-256 digest of `bytes`.
std::string sha256_hex(std::string_view bytes);

}  // namespace pare::internal

namespace pare::internal {

/// Hex SHA-256 digest of the file at `path`, read in chunks. Throws Error(kInput) if unreadable.
std::string sha256_file(const std::string& path);

}  // namespace pare::internal
