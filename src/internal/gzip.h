// zlib wrappers: whole-buffer gzip inflate (multi-member aware) and deflate.
#pragma once

#include <functional>   // std::function
#include <string>       // std::string
#include <string_view>  // std::string_view

namespace pare::internal {

/// True when `bytes` starts with the gzip magic bytes 1f 8b.
bool is_gzip(std::string_view bytes);

class GrowableBuffer;

/// Inflates a whole gzip file (one or more members) into `out`; returns the inflated size. With
/// `spill_fd` >= 0 the text goes to that file instead, through `out` as a 16 MiB window, and the
/// pages of `compressed` (a mapping) are given back as it is read. Throws Error(kInput) naming
/// `path` when the stream is corrupt or ends early or inflates past `max_bytes` (named
/// `limit_name` in the message), Error(kOutput) when the file cannot be written.
/// `on_step`, when given, is called after each step of about 4 MiB with the bytes inflated into
/// `out` so far (in memory only: `out` is then never reallocated below max_bytes + 4 MiB, so text
/// already published stays where it is); it returns false to stop early (the size so far is
/// returned).
std::size_t gunzip_into(std::string_view compressed, const std::string& path, GrowableBuffer& out,
                        int spill_fd = -1, std::size_t max_bytes = static_cast<std::size_t>(-1),
                        const char* limit_name = "",
                        const std::function<bool(std::size_t)>& on_step = {});

/// Compresses `bytes` into one gzip member.
std::string gzip(std::string_view bytes, int level);

}  // namespace pare::internal
