#include "internal/gzip.h"

#include <sys/mman.h>
#include <unistd.h>
#include <zlib.h>

#include <algorithm>  // std::min
#include <cstdint>    // std::uint32_t
#include <cerrno>     // errno
#include <cstdio>     // std::snprintf
#include <cstring>    // std::memcpy, std::strerror

#include "internal/growable_buffer.h"
#include "pare/error.h"

namespace pare::internal {

namespace {

// Gives back the whole pages of [data, data + bytes) of a read-only mapping.
void release_read(const char* data, std::size_t bytes) {
  const auto page = static_cast<std::uintptr_t>(::sysconf(_SC_PAGESIZE));
  const auto b = (reinterpret_cast<std::uintptr_t>(data) + page - 1) & ~(page - 1);
  const auto e = (reinterpret_cast<std::uintptr_t>(data) + bytes) & ~(page - 1);
  if (e > b) ::madvise(reinterpret_cast<void*>(b), e - b, MADV_DONTNEED);
}

}  // namespace

bool is_gzip(std::string_view bytes) {
  return bytes.size() >= 2 && static_cast<unsigned char>(bytes[0]) == 0x1f &&
         static_cast<unsigned char>(bytes[1]) == 0x8b;
}

std::size_t gunzip_into(std::string_view compressed, const std::string& path, GrowableBuffer& out, int spill_fd,
                        std::size_t max_bytes, const char* limit_name, const std::function<bool(std::size_t)>& on_step) {
  // Spilling, `out` is a staging window written to the file whenever it fills.
  constexpr std::size_t kWindow = std::size_t{16} << 20;
  std::size_t flushed = 0;
  auto write_out = [&](std::size_t bytes) {
    std::size_t done = 0;
    while (done < bytes) {
      const ssize_t put = ::write(spill_fd, out.data() + done, bytes - done);
      if (put < 0 && errno == EINTR) continue;
      if (put <= 0)
        throw Error(ErrorKind::kOutput, path + ": cannot write its inflated text to the cache file: " +
                                            std::strerror(errno) + " (free some space or use `cache_dir`)");
      done += static_cast<std::size_t>(put);
    }
    flushed += bytes;
  };
  if (spill_fd >= 0) out.reserve(kWindow + (std::size_t{1} << 22));
  // The trailer's ISIZE (size mod 2^32 of the last member) is a good first guess for one member.
  // On a damaged file it is garbage, so it is capped by deflate's best ratio (1032:1).
  if (spill_fd < 0 && compressed.size() >= 18) {
    std::uint32_t isize = 0;
    std::memcpy(&isize, compressed.data() + compressed.size() - 4, 4);
    out.reserve(std::max<std::size_t>(std::min<std::size_t>(isize, compressed.size() * 1032), 1 << 21));
  }
  z_stream zs{};
  if (inflateInit2(&zs, 15 + 16) != Z_OK) throw Error(ErrorKind::kOther, "zlib init failed");
  const auto* next = reinterpret_cast<const Bytef*>(compressed.data());
  std::size_t left = compressed.size();
  std::size_t produced = 0;
  int status = Z_OK;
  constexpr std::size_t kStep = std::size_t{1} << 22;
  while (true) {
    if (flushed + produced > max_bytes) {
      inflateEnd(&zs);
      char size[32];
      if (max_bytes >= 1'000'000'000)
        std::snprintf(size, sizeof size, "%.1f GB", static_cast<double>(max_bytes) / 1e9);
      else
        std::snprintf(size, sizeof size, "%.1f MB", static_cast<double>(max_bytes) / 1e6);
      throw_input_error({path},
                        std::string("the gzip data inflates past ") + size + " (" + limit_name + ") after " +
                            std::to_string(compressed.size() - left) + " compressed bytes",
                        "a small file that inflates this far is most likely a decompression bomb; if the file is "
                        "genuine, give (a larger) `memory`");
    }
    if (spill_fd >= 0 && produced >= kWindow) {
      write_out(produced);
      produced = 0;
      // The compressed text read so far is not needed again.
      release_read(compressed.data(), static_cast<std::size_t>(reinterpret_cast<const char*>(next) - compressed.data()));
    }
    if (out.capacity() - produced < kStep / 2) out.reserve(std::max(out.capacity() * 3 / 2, produced + kStep));
    const uInt in_now = static_cast<uInt>(std::min<std::size_t>(left, 1u << 30));
    // Published text comes in steps of 4 MiB.
    const uInt out_now = static_cast<uInt>(std::min<std::size_t>(out.capacity() - produced, on_step ? kStep : 1u << 30));
    zs.next_in = const_cast<Bytef*>(next);
    zs.avail_in = in_now;
    zs.next_out = reinterpret_cast<Bytef*>(out.data() + produced);
    zs.avail_out = out_now;
    status = inflate(&zs, Z_NO_FLUSH);
    const std::size_t used = in_now - zs.avail_in;
    next += used;
    left -= used;
    produced += out_now - zs.avail_out;
    if (on_step && !on_step(produced)) break;
    if (status == Z_STREAM_END) {
      // Another member may follow (files concatenated with cat); trailing zero padding is ignored.
      while (left > 0 && *next == 0) { ++next; --left; }
      if (left == 0) break;
      if (!is_gzip(std::string_view(reinterpret_cast<const char*>(next), left))) {
        inflateEnd(&zs);
        throw_input_error({path}, "unexpected bytes after the end of the gzip data",
                          "the file is damaged or is not one gzip file");
      }
      inflateReset(&zs);
      continue;
    }
    if (status == Z_BUF_ERROR && left == 0) {
      inflateEnd(&zs);
      throw_input_error({path},
                        "gzip data ends early after " + std::to_string(flushed + produced) +
                            " bytes of text",
                        "the file is truncated; copy or download it again");
    }
    if (status != Z_OK && status != Z_BUF_ERROR) {
      const std::string why = zs.msg ? zs.msg : "corrupt data";
      inflateEnd(&zs);
      throw_input_error({path}, "corrupt gzip data: " + why, "the file is damaged");
    }
  }
  inflateEnd(&zs);
  if (spill_fd >= 0) {
    write_out(produced);
    return flushed;
  }
  return produced;
}

std::string gzip(std::string_view bytes, int level) {
  z_stream zs{};
  if (deflateInit2(&zs, level, Z_DEFLATED, 15 + 16, 8, Z_DEFAULT_STRATEGY) != Z_OK)
    throw Error(ErrorKind::kOther, "zlib init failed");
  std::string out(deflateBound(&zs, static_cast<uLong>(bytes.size())) + 64, '\0');
  zs.next_in = reinterpret_cast<Bytef*>(const_cast<char*>(bytes.data()));
  zs.avail_in = static_cast<uInt>(bytes.size());
  zs.next_out = reinterpret_cast<Bytef*>(out.data());
  zs.avail_out = static_cast<uInt>(out.size());
  const int status = deflate(&zs, Z_FINISH);
  const std::size_t produced = zs.total_out;
  deflateEnd(&zs);
  if (status != Z_STREAM_END) throw Error(ErrorKind::kOther, "gzip compression failed");
  out.resize(produced);
  return out;
}

}  // namespace pare::internal
