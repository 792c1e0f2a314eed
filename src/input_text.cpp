#include "internal/input_text.h"

#include <fcntl.h>
#include <sys/mman.h>
#include <sys/stat.h>
#include <sys/statvfs.h>
#include <unistd.h>

#include <algorithm>           // std::max, std::min
#include <atomic>              // std::atomic
#include <cerrno>              // errno
#include <condition_variable>  // std::condition_variable
#include <cstdint>             // std::uint32_t, std::uintptr_t
#include <cstdio>              // std::fopen, std::fgets, std::sscanf, std::snprintf
#include <cstdlib>             // std::getenv
#include <cstring>             // std::memcpy, std::strerror
#include <exception>           // std::exception_ptr
#include <mutex>               // std::mutex
#include <new>                 // std::bad_alloc
#include <thread>              // std::thread
#include <utility>             // std::exchange, std::move

#include "pare/error.h"

#include "internal/columns.h"
#include "internal/gzip.h"

namespace pare::internal {

namespace {

// MemAvailable of /proc/meminfo in bytes (the whole memory when it cannot be read).
std::size_t available_memory() {
  std::FILE* f = std::fopen("/proc/meminfo", "r");
  std::size_t kib = 0;
  if (f) {
    char line[256];
    while (std::fgets(line, sizeof line, f))
      if (std::sscanf(line, "MemAvailable: %zu kB", &kib) == 1) break;
    std::fclose(f);
  }
  if (kib == 0)
    return static_cast<std::size_t>(::sysconf(_SC_PHYS_PAGES)) *
           static_cast<std::size_t>(::sysconf(_SC_PAGESIZE));
  return kib * 1024;
}

// Bytes free for us in `folder` ($TMPDIR or /tmp when empty), less 1 GiB kept for everyone else.
std::size_t free_space(const std::string& folder) {
  std::string dir = folder;
  if (dir.empty()) {
    const char* tmp = std::getenv("TMPDIR");
    dir = tmp && *tmp ? tmp : "/tmp";
  }
  struct statvfs fs {};
  if (::statvfs(dir.c_str(), &fs) != 0) return static_cast<std::size_t>(-1);
  const auto bytes = static_cast<std::size_t>(fs.f_bavail) * static_cast<std::size_t>(fs.f_frsize);
  constexpr std::size_t kReserve = std::size_t{1} << 30;
  return bytes > kReserve ? bytes - kReserve : 0;
}

std::string gib(std::size_t bytes) {
  char text[32];
  if (bytes >= 1'000'000'000)
    std::snprintf(text, sizeof text, "%.1f GB", static_cast<double>(bytes) / 1e9);
  else
    std::snprintf(text, sizeof text, "%.1f MB", static_cast<double>(bytes) / 1e6);
  return text;
}

}  // namespace

struct InputText::Stream {
  InputText compressed;  // the gzip file as read, dropped once inflated (the worker's alone)
  std::size_t compressed_size = 0;
  GrowableBuffer text;         // the inflated text, reserved whole
  std::uint32_t expected = 0;  // the trailer's ISIZE
  std::mutex mutex;
  std::condition_variable arrived;
  std::size_t ready = 0;  // bytes of `text` inflated so far
  bool done = false;
  std::exception_ptr error;
  std::atomic<bool> cancel{false};
  std::thread worker;

  ~Stream() {
    cancel = true;
    if (worker.joinable()) worker.join();
  }
};

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
  if (!S_ISREG(st.st_mode) && !S_ISFIFO(st.st_mode)) {
    // A device such as /dev/zero would be read forever.
    ::close(fd);
    throw_input_error({path}, "is not a regular file", "give the path of a data file");
  }
  const std::size_t memory_cap = available_memory();
  InputText text =
      read_bytes(path, fd, S_ISREG(st.st_mode), static_cast<std::size_t>(st.st_size), memory_cap);
  ::close(fd);
  if (!is_gzip(text.view())) return text;
  if (budget.bytes > 0) return inflate_to_cache(text, path, budget);
  return inflate_in_memory(std::move(text), path, memory_cap);
}

// A regular file is mapped; what cannot be (a pipe, a special file) is read, up to the memory
// available. Leaves `fd` open.
InputText InputText::read_bytes(const std::string& path, int fd, bool regular, std::size_t size,
                                std::size_t memory_cap) {
  InputText text;
  if (regular && size > 0) {
    void* p = ::mmap(nullptr, size, PROT_READ, MAP_PRIVATE, fd, 0);
    if (p != MAP_FAILED) {
      text.map_ = p;
      text.map_size_ = size;
      text.data_ = static_cast<const char*>(p);
      text.size_ = size;
      text.fd_ = ::fcntl(fd, F_DUPFD_CLOEXEC, 0);  // for read_at; -1 (mapping only) if it fails
      return text;
    }
  }
  std::size_t have = 0;
  while (true) {
    if (have > memory_cap) {
      ::close(fd);
      throw_input_error(
          {path}, "reading it would take more than the memory available (" + gib(memory_cap) + ")",
          "save it to a file and give `memory` SIZE");
    }
    if (have == text.inflated_.capacity())
      text.inflated_.reserve(std::max<std::size_t>(have * 2, 1 << 21));
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
  return text;
}

// With a memory budget: the text is inflated into a cache file, which is then mapped.
InputText InputText::inflate_to_cache(const InputText& compressed, const std::string& path,
                                      const MemoryBudget& budget) {
  const int cache = make_cache_file(budget.cache_dir);
  std::size_t size = 0;
  {
    GrowableBuffer window;
    try {
      // A legitimate CSV's text is about twice its float32 matrix, so this allows matrices up to
      // 128 times the budget; a small file that inflates past it is most likely a
      // decompression bomb. The free space of the cache folder bounds it too.
      const std::size_t cap =
          std::min(static_cast<std::size_t>(budget.bytes) * 256, free_space(budget.cache_dir));
      size = gunzip_into(compressed.view(), path, window, cache, cap,
                         "256 times `memory` or the free space of the cache folder");
    } catch (...) {
      ::close(cache);
      throw;
    }
  }
  InputText out;
  if (size > 0) {
    void* p = ::mmap(nullptr, size, PROT_READ, MAP_SHARED, cache, 0);
    const int err = errno;
    if (p == MAP_FAILED) {
      ::close(cache);
      throw Error(ErrorKind::kOutput,
                  path + ": cannot map its inflated text: " + std::strerror(err));
    }
    out.fd_ = cache;  // for read_at
    out.map_ = p;
    out.map_size_ = size;
    out.data_ = static_cast<const char*>(p);
    out.size_ = size;
  } else {
    ::close(cache);
  }
  return out;
}

// In memory: inflated by a thread of its own into memory reserved up front for the largest text
// allowed (address space only: pages are used as the text arrives), so published text never
// moves. Without room to reserve that, the whole text is inflated first (it may move as it grows).
InputText InputText::inflate_in_memory(InputText compressed, const std::string& path,
                                       std::size_t memory_cap) {
  auto stream = std::make_shared<Stream>();
  constexpr std::size_t kSlack = std::size_t{8} << 20;
  bool reserved = true;
  try {
    stream->text.reserve(memory_cap + kSlack);
  } catch (const std::bad_alloc&) {
    reserved = false;
  }
  if (!reserved) {
    stream.reset();
    GrowableBuffer inflated;
    const std::size_t size =
        gunzip_into(compressed.view(), path, inflated, -1, memory_cap, "the memory available");
    InputText out;
    out.inflated_ = std::move(inflated);
    out.data_ = size ? out.inflated_.data() : "";
    out.size_ = size;
    return out;
  }
  stream->compressed = std::move(compressed);
  stream->compressed_size = stream->compressed.size_;
  if (stream->compressed_size >= 18)
    std::memcpy(&stream->expected, stream->compressed.data_ + stream->compressed_size - 4, 4);
  Stream* s = stream.get();
  s->worker = std::thread([s, path, memory_cap] {
    std::size_t size = 0;
    std::exception_ptr error;
    try {
      size = gunzip_into(s->compressed.view(), path, s->text, -1, memory_cap,
                         "the memory available", [s](std::size_t produced) {
                           {
                             const std::lock_guard<std::mutex> lock(s->mutex);
                             s->ready = produced;
                           }
                           s->arrived.notify_all();
                           return !s->cancel.load(std::memory_order_relaxed);
                         });
    } catch (...) {
      error = std::current_exception();
    }
    s->compressed =
        InputText();  // its pages would count in the resident size while parsing goes on
    {
      const std::lock_guard<std::mutex> lock(s->mutex);
      if (!error) s->ready = size;
      s->error = error;
      s->done = true;
    }
    s->arrived.notify_all();
  });
  InputText out;
  out.stream_ = std::move(stream);
  out.data_ = out.stream_->text.data();
  return out;
}

bool InputText::streaming() const {
  return stream_ != nullptr;
}

std::string_view InputText::wait_for(std::size_t bytes, bool& complete) const {
  if (!stream_) {
    complete = true;
    return {data_, size_};
  }
  std::unique_lock<std::mutex> lock(stream_->mutex);
  stream_->arrived.wait(lock, [&] { return stream_->ready >= bytes || stream_->done; });
  complete = stream_->done;
  return {stream_->text.data(), stream_->ready};
}

std::size_t InputText::expected_size() const {
  if (!stream_) return size_;
  const std::size_t guess = stream_->expected;
  return std::max(guess, stream_->compressed_size);
}

std::string_view InputText::view() const {
  if (!stream_) return {data_, size_};
  std::unique_lock<std::mutex> lock(stream_->mutex);
  stream_->arrived.wait(lock, [&] { return stream_->done; });
  if (stream_->error) std::rethrow_exception(stream_->error);
  return {stream_->ready ? stream_->text.data() : "", stream_->ready};
}

InputText::InputText(InputText&& other) noexcept {
  *this = std::move(other);
}

InputText& InputText::operator=(InputText&& other) noexcept {
  if (this == &other) return *this;
  if (map_) ::munmap(map_, map_size_);
  if (fd_ >= 0) ::close(fd_);
  fd_ = std::exchange(other.fd_, -1);
  map_ = std::exchange(other.map_, nullptr);
  map_size_ = std::exchange(other.map_size_, 0);
  inflated_ = std::move(other.inflated_);  // the mapping changes owner, not address
  data_ = std::exchange(other.data_, "");
  size_ = std::exchange(other.size_, 0);
  stream_ = std::move(other.stream_);
  return *this;
}

void InputText::release(const char* begin, const char* end, bool done) const {
  if (!map_ && !done) return;
  const auto page = static_cast<std::uintptr_t>(::sysconf(_SC_PAGESIZE));
  const auto b = (reinterpret_cast<std::uintptr_t>(begin) + page - 1) & ~(page - 1);
  const auto e = reinterpret_cast<std::uintptr_t>(end) & ~(page - 1);
  if (e > b) ::madvise(reinterpret_cast<void*>(b), e - b, MADV_DONTNEED);
}

bool InputText::readable_at() const { return fd_ >= 0; }

void InputText::read_at(const char* at, std::size_t bytes, char* into) const {
  auto offset = static_cast<off_t>(at - data_);
  while (bytes > 0) {
    const ssize_t got = ::pread(fd_, into, bytes, offset);
    if (got < 0 && errno == EINTR) continue;
    if (got < 0)
      throw Error(ErrorKind::kInput, std::string("cannot read the input: ") + std::strerror(errno));
    if (got == 0) throw Error(ErrorKind::kInput, "the input file became shorter while it was read");
    bytes -= static_cast<std::size_t>(got);
    into += got;
    offset += got;
  }
}

InputText::~InputText() {
  if (map_) ::munmap(map_, map_size_);
  if (fd_ >= 0) ::close(fd_);
}

}  // namespace pare::internal
