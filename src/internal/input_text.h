// The whole text of an input file: a plain file mapped rather than copied, or the inflated text
// of a gzip file.
#pragma once

#include <cstddef>      // std::size_t
#include <memory>       // std::shared_ptr
#include <string>       // std::string
#include <string_view>  // std::string_view

#include "pare/matrix.h"

#include "internal/growable_buffer.h"

namespace pare::internal {

/// The whole text of an input file: a read-only mapping of a plain file, or the inflated content of
/// a gzip file.
///
/// A gzip file read into memory is inflated by a thread of its own while the reader parses what
/// has arrived (`streaming()`): `wait_for` hands out the text inflated so far, which never moves,
/// and `view` waits for the whole of it.
class InputText {
 public:
  /// Opens `path`; throws Error(kInput) when it cannot be read or its gzip data is damaged (for a
  /// streamed gzip file, from `view`). With a memory budget, gzip text is inflated into a cache
  /// file (see pare::Columns) rather than memory, before open returns.
  static InputText open(const std::string& path, const MemoryBudget& budget = {});

  /// True while the text is still arriving (until `view` has been called).
  bool streaming() const;
  /// The text inflated so far, at least `bytes` long unless that is all there is (then
  /// `complete` is set). Never throws: a damaged stream simply ends, and `view` says why.
  std::string_view wait_for(std::size_t bytes, bool& complete) const;
  /// The expected size of the whole text (the gzip trailer's, for a streamed file), for progress.
  std::size_t expected_size() const;

  InputText(InputText&& other) noexcept;
  InputText& operator=(InputText&& other) noexcept;
  InputText(const InputText&) = delete;
  InputText& operator=(const InputText&) = delete;
  ~InputText();

  /// The whole text; for a streamed file, waits for the end of the stream and throws its error.
  std::string_view view() const;

  /// Gives back the memory of [begin, end) (whole pages inside it) once it has been read: always
  /// for a mapped file (the kernel reads it again from its cache if it is touched again), and for
  /// inflated text only when `done` (its content would be lost). Keeps the resident size of a
  /// large read near the size of the matrix instead of matrix plus text.
  void release(const char* begin, const char* end, bool done) const;

  /// True when the text is a file's (the plain file, or a gzip file's text inflated into a cache
  /// file) and read_at can copy parts of it. Copying through the file into a buffer that is used
  /// again and again is cheaper than reading through the mapping: each page of a mapping costs a
  /// page fault the first time it is touched, and an expensive one under some virtual machines.
  bool readable_at() const;
  /// Copies the `bytes` of the text at `at` (inside view()) into `into`. Throws Error(kInput) when
  /// the file cannot be read or has become shorter.
  void read_at(const char* at, std::size_t bytes, char* into) const;

 private:
  InputText() = default;
  // The steps of open: the file's bytes as they are (mapped, or read from a pipe), then for a
  // gzip file its text inflated into a cache file, or in memory by a thread of its own.
  static InputText read_bytes(const std::string& path, int fd, bool regular, std::size_t size,
                              std::size_t memory_cap);
  static InputText inflate_to_cache(const InputText& compressed, const std::string& path,
                                    const MemoryBudget& budget);
  static InputText inflate_in_memory(InputText compressed, const std::string& path,
                                     std::size_t memory_cap);

  void* map_ = nullptr;  // file mapping, when the file is plain text
  int fd_ = -1;          // the mapped file, for read_at
  std::size_t map_size_ = 0;
  GrowableBuffer inflated_;  // inflated text, when the file is gzip
  const char* data_ = "";
  std::size_t size_ = 0;
  struct Stream;
  std::shared_ptr<Stream> stream_;  // the inflating thread and what it has made, while streaming
};

}  // namespace pare::internal
