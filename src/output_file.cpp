// Output files written whole or not at all (a temporary part renamed into place), and folders.
#include "pare/io.h"

#include <fcntl.h>
#include <signal.h>
#include <sys/mman.h>
#include <unistd.h>

#include <algorithm>   // std::min
#include <atomic>      // std::atomic
#include <cerrno>      // errno
#include <chrono>      // std::chrono::steady_clock
#include <cstdlib>     // std::strtol
#include <cstring>     // std::memcpy, std::strerror
#include <filesystem>  // std::filesystem::create_directories
#include <string>      // std::string

#include "internal/gzip.h"
#include "pare/error.h"

namespace pare {

// ---- output ----------------------------------------------------------------------------------

namespace {
std::atomic<unsigned> temp_counter{0};
}

namespace {

// Removes ".NAME.part-PID-N" files left in `folder` by runs that were killed (their process no
// longer exists), so a killed run's leftovers go with the next successful one. Parts of a run
// still alive, this one included, are left alone.
void remove_stale_parts(const std::filesystem::path& folder, const std::string& base) {
  const std::string prefix = "." + base + ".part-";
  std::error_code ec;
  for (std::filesystem::directory_iterator it(folder.empty() ? "." : folder, ec), end; !ec && it != end; it.increment(ec)) {
    const std::string name = it->path().filename().string();
    if (name.rfind(prefix, 0) != 0) continue;
    const char* digits = name.c_str() + prefix.size();
    char* stop = nullptr;
    const long pid = std::strtol(digits, &stop, 10);
    if (stop == digits || *stop != '-' || pid <= 0) continue;
    if (::kill(static_cast<pid_t>(pid), 0) == 0 || errno != ESRCH) continue;  // alive, or not ours to judge
    std::error_code ignored;
    std::filesystem::remove(it->path(), ignored);
  }
}

}  // namespace

OutputFile::OutputFile(std::string path) : path_(std::move(path)) {
  const std::filesystem::path final_path(path_);
  const std::string base = final_path.filename().string();
  remove_stale_parts(final_path.parent_path(), base);
  temp_path_ = (final_path.parent_path() /
                ("." + base + ".part-" + std::to_string(::getpid()) + "-" +
                 std::to_string(temp_counter++)))
                   .string();
  fd_ = ::open(temp_path_.c_str(), O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC, 0644);
  if (fd_ < 0)
    throw_output_error(path_, std::string("cannot create the output file: ") + std::strerror(errno),
                       "check that the folder exists and is writable");
}

namespace {

constexpr std::size_t kDirectBlock = std::size_t{4} << 20;

}  // namespace

OutputFile::~OutputFile() {
  if (stage_) ::munmap(stage_, kDirectBlock);
  if (committed_) return;
  if (fd_ >= 0) ::close(fd_);
  ::unlink(temp_path_.c_str());
}

void OutputFile::write_out(const char* data, std::size_t size) {
  while (size > 0) {
    const ssize_t put = ::write(fd_, data, size);
    if (put < 0) {
      if (errno == EINTR) continue;
      if (errno == EINVAL && stage_) {
        // The filesystem took O_DIRECT at open but not these writes: write normally instead.
        ::fcntl(fd_, F_SETFL, ::fcntl(fd_, F_GETFL) & ~O_DIRECT);
        continue;
      }
      throw_output_error(path_, std::string("cannot write: ") + std::strerror(errno),
                         "check free disk space");
    }
    data += put;
    size -= static_cast<std::size_t>(put);
  }
}

void OutputFile::write(std::string_view bytes) {
  if (!stage_) {
    write_out(bytes.data(), bytes.size());
    return;
  }
  while (!bytes.empty()) {
    const std::size_t take = std::min(bytes.size(), kDirectBlock - staged_);
    std::memcpy(stage_ + staged_, bytes.data(), take);
    staged_ += take;
    bytes.remove_prefix(take);
    if (staged_ == kDirectBlock) {
      const auto start = std::chrono::steady_clock::now();
      write_out(stage_, kDirectBlock);
      staged_ = 0;
      // A slow device (a network share, a disk) would now hold up the run, where the page cache
      // would have absorbed the writes: averaging under 250 MB/s over 4 blocks or more, go back
      // to writing through it.
      direct_seconds_ += std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
      ++direct_blocks_;
      if (direct_blocks_ >= 4 && direct_seconds_ > 0.016 * direct_blocks_) {
        ::fcntl(fd_, F_SETFL, ::fcntl(fd_, F_GETFL) & ~O_DIRECT);
        ::munmap(stage_, kDirectBlock);
        stage_ = nullptr;
        write_out(bytes.data(), bytes.size());
        return;
      }
    }
  }
}

void OutputFile::write_direct() {
  if (stage_ || fd_ < 0) return;
  // Whole blocks from an aligned buffer at aligned offsets: what was written so far is flushed
  // normally first only if it left the offset unaligned.
  const off_t at = ::lseek(fd_, 0, SEEK_CUR);
  if (at < 0 || at % 4096 != 0) return;
  const int flags = ::fcntl(fd_, F_GETFL);
  if (flags < 0 || ::fcntl(fd_, F_SETFL, flags | O_DIRECT) != 0) return;
  void* p = ::mmap(nullptr, kDirectBlock, PROT_READ | PROT_WRITE, MAP_PRIVATE | MAP_ANONYMOUS, -1, 0);
  if (p == MAP_FAILED) {
    ::fcntl(fd_, F_SETFL, flags);
    return;
  }
  stage_ = static_cast<char*>(p);
}

void OutputFile::write_gzip(std::string_view bytes, int level) { write(internal::gzip(bytes, level)); }

void OutputFile::commit() {
  if (stage_ && staged_ > 0) {
    // The tail is not a whole block: written through the page cache.
    ::fcntl(fd_, F_SETFL, ::fcntl(fd_, F_GETFL) & ~O_DIRECT);
    write_out(stage_, staged_);
    staged_ = 0;
  }
  if (::close(fd_) != 0) {
    fd_ = -1;
    throw_output_error(path_, std::string("cannot finish writing: ") + std::strerror(errno));
  }
  fd_ = -1;
  if (::rename(temp_path_.c_str(), path_.c_str()) != 0)
    throw_output_error(path_, std::string("cannot move the finished file into place: ") +
                                  std::strerror(errno));
  committed_ = true;
}

void write_file_atomically(const std::string& path, std::string_view content) {
  OutputFile f(path);
  f.write(content);
  f.commit();
}

void ensure_directory(const std::string& path) {
  std::error_code ec;
  std::filesystem::create_directories(path, ec);
  if (ec) throw_output_error(path, "cannot create the output folder: " + ec.message());
  if (!std::filesystem::is_directory(path, ec))
    throw_output_error(path, "is not a folder", "choose another `out`");
}

}  // namespace pare
