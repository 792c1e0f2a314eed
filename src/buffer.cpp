#include "internal/buffer.h"

#include <fcntl.h>
#include <sys/mman.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>   // errno
#include <cstdint>  // std::uintptr_t
#include <cstring>  // std::strerror
#include <new>      // std::bad_alloc
#include <algorithm>  // std::max
#include <utility>  // std::exchange

#include "internal/gzip.h"
#include "internal/spill.h"
#include "pare/error.h"

namespace pare::internal {

void advise_huge_pages(void* data, std::size_t bytes) {
#ifdef MADV_HUGEPAGE
  constexpr std::uintptr_t kHuge = std::uintptr_t{2} << 20;
  const auto begin = (reinterpret_cast<std::uintptr_t>(data) + kHuge - 1) & ~(kHuge - 1);
  const auto end = (reinterpret_cast<std::uintptr_t>(data) + bytes) & ~(kHuge - 1);
  if (end > begin) ::madvise(reinterpret_cast<void*>(begin), end - begin, MADV_HUGEPAGE);
#else
  (void)data;
  (void)bytes;
#endif
}

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
  constexpr std::size_t kHuge = std::size_t{2} << 20;
  const std::size_t size = (bytes + kHuge - 1) / kHuge * kHuge;
  void* p = data_ ? ::mremap(data_, capacity_, size, MREMAP_MAYMOVE)
                  : ::mmap(nullptr, size, PROT_READ | PROT_WRITE, MAP_PRIVATE | MAP_ANONYMOUS, -1, 0);
  if (p == MAP_FAILED) throw std::bad_alloc();
  advise_huge_pages(static_cast<char*>(p) + capacity_ - (capacity_ % kHuge), size - capacity_ + capacity_ % kHuge);
  data_ = static_cast<char*>(p);
  capacity_ = size;
}

InputText InputText::open(const std::string& path, const MemoryBudget& budget) {
  const int fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) {
    const int err = errno;
    throw_input_error({path}, std::string("cannot open the file: ") + std::strerror(err),
                      err == ENOENT ? "check the path" : "check the file's permissions");
  }
  struct stat st {};
  if (::fstat(fd, &st) != 0 || S_ISDIR(st.st_mode)) {
    ::close(fd);
    throw_input_error({path}, "is a folder, not a file", "give the path of a data file");
  }
  InputText text;
  if (S_ISREG(st.st_mode) && st.st_size > 0) {
    const auto size = static_cast<std::size_t>(st.st_size);
    void* p = ::mmap(nullptr, size, PROT_READ, MAP_PRIVATE, fd, 0);
    if (p != MAP_FAILED) {
      text.map_ = p;
      text.map_size_ = size;
      text.data_ = static_cast<const char*>(p);
      text.size_ = size;
      ::madvise(p, size, MADV_SEQUENTIAL);
    }
  }
  if (!text.map_) {
    // Not mappable (a pipe, a special file): read it.
    std::size_t have = 0;
    while (true) {
      if (have == text.inflated_.capacity()) text.inflated_.reserve(std::max<std::size_t>(have * 2, 1 << 21));
      const ssize_t got = ::read(fd, text.inflated_.data() + have, text.inflated_.capacity() - have);
      if (got < 0) {
        if (errno == EINTR) continue;
        const int err = errno;
        ::close(fd);
        throw_input_error({path}, std::string("cannot read the file: ") + std::strerror(err));
      }
      if (got == 0) break;
      have += static_cast<std::size_t>(got);
    }
    text.data_ = have ? text.inflated_.data() : "";
    text.size_ = have;
  }
  ::close(fd);
  if (is_gzip(text.view()) && budget.bytes > 0) {
    const int cache = make_cache_file(budget.cache_dir);
    std::size_t size = 0;
    {
      GrowableBuffer window;
      try {
        size = gunzip_into(text.view(), path, window, cache);
      } catch (...) {
        ::close(cache);
        throw;
      }
    }
    InputText out;
    if (size > 0) {
      void* p = ::mmap(nullptr, size, PROT_READ, MAP_SHARED, cache, 0);
      const int err = errno;
      ::close(cache);
      if (p == MAP_FAILED) throw Error(ErrorKind::kOutput, path + ": cannot map its inflated text: " + std::strerror(err));
      ::madvise(p, size, MADV_SEQUENTIAL);
      out.map_ = p;
      out.map_size_ = size;
      out.data_ = static_cast<const char*>(p);
      out.size_ = size;
    } else {
      ::close(cache);
    }
    return out;
  }
  if (is_gzip(text.view())) {
    GrowableBuffer inflated;
    const std::size_t size = gunzip_into(text.view(), path, inflated);
    InputText out;
    out.inflated_ = std::move(inflated);
    out.data_ = size ? out.inflated_.data() : "";
    out.size_ = size;
    return out;
  }
  return text;
}

InputText::InputText(InputText&& other) noexcept { *this = std::move(other); }

InputText& InputText::operator=(InputText&& other) noexcept {
  if (this == &other) return *this;
  if (map_) ::munmap(map_, map_size_);
  map_ = std::exchange(other.map_, nullptr);
  map_size_ = std::exchange(other.map_size_, 0);
  inflated_ = std::move(other.inflated_);  // the mapping changes owner, not address
  data_ = std::exchange(other.data_, "");
  size_ = std::exchange(other.size_, 0);
  return *this;
}

void InputText::release(const char* begin, const char* end, bool done) const {
  if (!map_ && !done) return;
  const auto page = static_cast<std::uintptr_t>(::sysconf(_SC_PAGESIZE));
  const auto b = (reinterpret_cast<std::uintptr_t>(begin) + page - 1) & ~(page - 1);
  const auto e = reinterpret_cast<std::uintptr_t>(end) & ~(page - 1);
  if (e > b) ::madvise(reinterpret_cast<void*>(b), e - b, MADV_DONTNEED);
}

InputText::~InputText() {
  if (map_) ::munmap(map_, map_size_);
}

}  // namespace pare::internal
