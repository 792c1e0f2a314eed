#include "internal/growable_buffer.h"

#include <sys/mman.h>

#include <cstdint>  // std::uintptr_t
#include <new>      // std::bad_alloc
#include <utility>  // std::exchange

namespace pare::internal {

namespace {

constexpr std::size_t kHuge = std::size_t{2} << 20;

// Asks the kernel to back the whole 2 MiB pages of [data, data + bytes) with transparent huge
// pages (a hint; ignored when unsupported). Called before the memory is first touched.
void advise_huge_pages(void* data, std::size_t bytes) {
#ifdef MADV_HUGEPAGE
  const auto begin = (reinterpret_cast<std::uintptr_t>(data) + kHuge - 1) & ~(kHuge - 1);
  const auto end = (reinterpret_cast<std::uintptr_t>(data) + bytes) & ~(kHuge - 1);
  if (end > begin) ::madvise(reinterpret_cast<void*>(begin), end - begin, MADV_HUGEPAGE);
#else
  (void)data;
  (void)bytes;
#endif
}

}  // namespace

GrowableBuffer::GrowableBuffer(GrowableBuffer&& other) noexcept
    : data_(std::exchange(other.data_, nullptr)), capacity_(std::exchange(other.capacity_, 0)) {}

GrowableBuffer& GrowableBuffer::operator=(GrowableBuffer&& other) noexcept {
  if (this != &other) {
    if (data_) ::munmap(data_, capacity_);
    data_ = std::exchange(other.data_, nullptr);
    capacity_ = std::exchange(other.capacity_, 0);
  }
  return *this;
}

GrowableBuffer::~GrowableBuffer() {
  if (data_) ::munmap(data_, capacity_);
}

void GrowableBuffer::reserve(std::size_t bytes) {
  if (bytes <= capacity_) return;
  const std::size_t size = (bytes + kHuge - 1) / kHuge * kHuge;
  void* p = data_
                ? ::mremap(data_, capacity_, size, MREMAP_MAYMOVE)
                : ::mmap(nullptr, size, PROT_READ | PROT_WRITE, MAP_PRIVATE | MAP_ANONYMOUS, -1, 0);
  if (p == MAP_FAILED) throw std::bad_alloc();
  advise_huge_pages(static_cast<char*>(p) + capacity_ - (capacity_ % kHuge),
                    size - capacity_ + capacity_ % kHuge);
  data_ = static_cast<char*>(p);
  capacity_ = size;
}

}  // namespace pare::internal
