// zlib wrappers: whole-buffer gzip inflate (multi-member aware) and deflate.
#pragma once

#include <string>       // std::string
#include <string_view>  // std::string_view

namespace pare::internal {

/// True when `bytes` starts with the gzip magic bytes 1f 8b.
bool is_gzip(std::string_view bytes);

class GrowableBuffer;

/// Inflates a whole gzip file (one or more members) into `out`; returns the inflated size. Throws
/// Error(kInput) naming `path` when the stream is corrupt or ends early.
std::size_t gunzip_into(std::string_view compressed, const std::string& path, GrowableBuffer& out);

/// Compresses `bytes` into one gzip member.
std::string gzip(std::string_view bytes, int level);

}  // namespace pare::internal
