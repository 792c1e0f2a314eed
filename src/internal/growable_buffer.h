// Large anonymous memory regions mapped directly, so the kernel can back them with 2 MiB pages:
// page faults are costly on virtual machines, and a 400 MB buffer faulted in 4 KiB pages takes
// 100,000 of them, in 2 MiB pages 200.
#pragma once

#include <cstddef>  // std::size_t

namespace pare::internal {

/// An anonymous mapping that grows (by mremap) without copying through user space. New memory
/// is zero and asked to be backed by transparent huge pages.
class GrowableBuffer {
 public:
  GrowableBuffer() = default;
  GrowableBuffer(GrowableBuffer&& other) noexcept;
  GrowableBuffer& operator=(GrowableBuffer&& other) noexcept;
  GrowableBuffer(const GrowableBuffer&) = delete;
  GrowableBuffer& operator=(const GrowableBuffer&) = delete;
  ~GrowableBuffer();

  /// Makes the capacity at least `bytes` (contents kept). Throws std::bad_alloc when it cannot.
  void reserve(std::size_t bytes);
  char* data() { return data_; }
  const char* data() const { return data_; }
  std::size_t capacity() const { return capacity_; }

 private:
  char* data_ = nullptr;
  std::size_t capacity_ = 0;
};

}  // namespace pare::internal
