#include <fcntl.h>
#include <sys/mman.h>
#include <unistd.h>

#include <algorithm>  // std::copy_n, std::find_if
#include <atomic>     // std::atomic
#include <cerrno>     // errno
#include <cstdint>    // std::uintptr_t
#include <cstdlib>    // std::getenv
#include <cstring>    // std::strerror
#include <mutex>      // std::mutex, std::lock_guard
#include <utility>    // std::exchange
#include <vector>     // std::vector

#include "internal/columns.h"
#include "internal/growable_buffer.h"
#include "pare/error.h"
#include "pare/matrix.h"

namespace pare {

namespace internal {

namespace {

struct Span {
  std::uintptr_t begin, end;
};

// The mappings of the cache files alive now. Few ever exist at once (the data, perhaps a copy of
// the kept columns), so a locked vector is plenty; the atomic count keeps the common case (none)
// free of the lock.
std::mutex registry_mutex;
std::vector<Span> registry;
std::atomic<int> registry_size{0};

// A fault on a file mapping maps more than the page touched: the cached pages around it (the
// kernel's fault-around, 64 KiB by default) or the whole folio holding it (the page cache uses
// folios of up to 2 MiB on recent kernels). What is given back is therefore rounded out to 2 MiB
// windows of the file.
constexpr std::uintptr_t kWindow = 2 * 1024 * 1024;

void register_span(const void* data, std::size_t bytes) {
  const std::lock_guard lock(registry_mutex);
  const auto b = reinterpret_cast<std::uintptr_t>(data);
  registry.push_back({b, b + bytes});
  registry_size.store(static_cast<int>(registry.size()));
}

void unregister_span(const void* data) {
  const std::lock_guard lock(registry_mutex);
  const auto b = reinterpret_cast<std::uintptr_t>(data);
  std::erase_if(registry, [b](const Span& s) { return s.begin == b; });
  registry_size.store(static_cast<int>(registry.size()));
}

}  // namespace

bool any_on_disk() { return registry_size.load(std::memory_order_relaxed) > 0; }

int make_cache_file(const std::string& folder) {
  std::string dir = folder;
  if (dir.empty()) {
    const char* tmp = std::getenv("TMPDIR");
    dir = tmp && *tmp ? tmp : "/tmp";
  }
  std::string name = dir + "/.pare-cache-XXXXXX";
  const int fd = ::mkostemp(name.data(), O_CLOEXEC);
  if (fd < 0) {
    const int err = errno;
    throw Error(ErrorKind::kOutput, dir + ": cannot create a cache file: " + std::strerror(err) +
                                        " (give a writable folder with `cache_dir`, or raise `memory`)");
  }
  // Unlinked at once: the file lives as long as it is open or mapped and vanishes with the
  // process, however the process ends.
  ::unlink(name.c_str());
  return fd;
}

std::uintptr_t window_of(const void* data) {
  const auto b = reinterpret_cast<std::uintptr_t>(data);
  const std::lock_guard lock(registry_mutex);
  for (const Span& s : registry)
    if (b >= s.begin && b < s.end) return s.begin + ((b - s.begin) & ~(kWindow - 1));
  return 0;
}

void release_pages(const void* data, std::size_t bytes) {
  if (bytes == 0 || !any_on_disk()) return;
  const auto b = reinterpret_cast<std::uintptr_t>(data);
  Span mapping{0, 0};
  {
    const std::lock_guard lock(registry_mutex);
    const auto it = std::find_if(registry.begin(), registry.end(), [b](const Span& s) { return b >= s.begin && b < s.end; });
    if (it == registry.end()) return;
    mapping = *it;
  }
  // Windows are aligned in the file (the mapping starts at offset 0), as folios are.
  const std::uintptr_t offset = b - mapping.begin;
  const std::uintptr_t begin = mapping.begin + (offset & ~(kWindow - 1));
  const std::uintptr_t end = std::min(mapping.end, mapping.begin + ((offset + bytes + kWindow - 1) & ~(kWindow - 1)));
  if (end > begin) ::madvise(reinterpret_cast<void*>(begin), end - begin, MADV_DONTNEED);
}

/// Memory of a Columns: anonymous memory, or a shared mapping of an unlinked cache file.
class ColumnStorage {
 public:
  ColumnStorage(std::size_t bytes, const MemoryBudget& budget) {
    if (budget.fits(static_cast<std::int64_t>(bytes))) {
      memory_.reserve(std::max<std::size_t>(bytes, 1));
      data_ = reinterpret_cast<float*>(memory_.data());
      return;
    }
    const int fd = make_cache_file(budget.cache_dir);
    const std::string dir = budget.cache_dir.empty() ? "the cache folder" : budget.cache_dir;
    if (::ftruncate(fd, static_cast<off_t>(bytes)) != 0) {
      const int err = errno;
      ::close(fd);
      throw Error(ErrorKind::kOutput, dir + ": cannot size a cache file of " + std::to_string(bytes) +
                                          " bytes: " + std::strerror(err) + " (free some space or use `cache_dir`)");
    }
    void* p = ::mmap(nullptr, std::max<std::size_t>(bytes, 1), PROT_READ | PROT_WRITE, MAP_SHARED, fd, 0);
    const int err = errno;
    ::close(fd);
    if (p == MAP_FAILED)
      throw Error(ErrorKind::kOutput, dir + ": cannot map the cache file: " + std::strerror(err));
    map_ = p;
    map_bytes_ = std::max<std::size_t>(bytes, 1);
    data_ = static_cast<float*>(p);
    register_span(map_, map_bytes_);
  }
  ColumnStorage(const ColumnStorage&) = delete;
  ColumnStorage& operator=(const ColumnStorage&) = delete;
  ~ColumnStorage() {
    if (map_) {
      unregister_span(map_);
      ::munmap(map_, map_bytes_);
    }
  }

  float* data() const { return data_; }
  bool on_disk() const { return map_ != nullptr; }
  void release_all() const {
    if (map_) ::madvise(map_, map_bytes_, MADV_DONTNEED);
  }

 private:
  GrowableBuffer memory_;
  void* map_ = nullptr;
  std::size_t map_bytes_ = 0;
  float* data_ = nullptr;
};

}  // namespace internal

Columns::Columns(const Columns& other) : Base(nullptr, 0, 0) { *this = other; }

Columns& Columns::operator=(const Columns& other) {
  if (this == &other) return *this;
  resize(other.rows(), other.cols());
  std::copy_n(other.data(), other.size(), data());
  return *this;
}

Columns::Columns(Columns&& other) noexcept : Base(nullptr, 0, 0) { *this = std::move(other); }

Columns& Columns::operator=(Columns&& other) noexcept {
  if (this == &other) return *this;
  storage_ = std::move(other.storage_);
  reseat(other.data(), other.rows(), other.cols());
  other.reseat(nullptr, 0, 0);
  return *this;
}

Columns::~Columns() = default;

void Columns::resize(Eigen::Index n, Eigen::Index p) { allocate(n, p, MemoryBudget{}); }

void Columns::allocate(Eigen::Index n, Eigen::Index p, const MemoryBudget& budget) {
  storage_.reset();
  reseat(nullptr, 0, 0);
  const auto bytes = static_cast<std::size_t>(n) * static_cast<std::size_t>(p) * sizeof(float);
  storage_ = std::make_shared<internal::ColumnStorage>(bytes, budget);
  reseat(storage_->data(), n, p);
}

bool Columns::on_disk() const { return storage_ && storage_->on_disk(); }

void Columns::release_all() const {
  if (storage_) storage_->release_all();
}

void Columns::reseat(float* data, Eigen::Index n, Eigen::Index p) {
  // Eigen's documented way to point a Map elsewhere.
  new (static_cast<Base*>(this)) Base(data, n, p);
}

}  // namespace pare
