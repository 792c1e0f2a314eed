// Helpers shared by the libFuzzer targets: inputs become files, since pare reads paths.
#pragma once

#include <sys/mman.h>
#include <unistd.h>

#include <cstddef>  // std::size_t
#include <cstdint>  // std::uint8_t
#include <string>   // std::string

namespace pare::fuzz {

/// An anonymous in-memory file holding `size` bytes, reachable by path while it lives.
class MemoryFile {
 public:
  MemoryFile(const std::uint8_t* data, std::size_t size) {
    fd_ = ::memfd_create("pare-fuzz", MFD_CLOEXEC);
    std::size_t done = 0;
    while (fd_ >= 0 && done < size) {
      const ssize_t put = ::write(fd_, data + done, size - done);
      if (put <= 0) break;
      done += static_cast<std::size_t>(put);
    }
  }
  MemoryFile(const MemoryFile&) = delete;
  MemoryFile& operator=(const MemoryFile&) = delete;
  ~MemoryFile() {
    if (fd_ >= 0) ::close(fd_);
  }
  bool ok() const { return fd_ >= 0; }
  std::string path() const { return "/proc/self/fd/" + std::to_string(fd_); }

 private:
  int fd_ = -1;
};

}  // namespace pare::fuzz
