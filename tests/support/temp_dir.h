// A unique temporary folder for one test, removed with everything in it when the object goes out
// of scope, plus small helpers to write and read files in it.
#pragma once

#include <stdlib.h>  // mkdtemp

#include <filesystem>   // std::filesystem::temp_directory_path, remove_all
#include <fstream>      // std::ofstream, std::ifstream
#include <iterator>     // std::istreambuf_iterator
#include <stdexcept>    // std::runtime_error
#include <string>       // std::string
#include <string_view>  // std::string_view

namespace pare::test {

class TempDir {
 public:
  TempDir() {
    std::string pattern = (std::filesystem::temp_directory_path() / "pare-test-XXXXXX").string();
    if (::mkdtemp(pattern.data()) == nullptr)
      throw std::runtime_error("cannot create a temporary folder from " + pattern);
    path_ = pattern;
  }
  TempDir(const TempDir&) = delete;
  TempDir& operator=(const TempDir&) = delete;
  ~TempDir() {
    std::error_code ec;
    std::filesystem::remove_all(path_, ec);  // best effort: a destructor must not throw
  }

  const std::string& path() const { return path_; }

  /// The path of `name` inside the folder.
  std::string file(const std::string& name) const { return path_ + "/" + name; }

  /// Writes `content` byte for byte to `name` and returns its path.
  std::string write(const std::string& name, std::string_view content) const {
    const std::string p = file(name);
    std::ofstream f(p, std::ios::binary | std::ios::trunc);
    f.write(content.data(), static_cast<std::streamsize>(content.size()));
    if (!f) throw std::runtime_error("cannot write " + p);
    return p;
  }

  /// Reads the file `path` whole (no decompression).
  static std::string read(const std::string& path) {
    std::ifstream f(path, std::ios::binary);
    if (!f) throw std::runtime_error("cannot read " + path);
    return std::string(std::istreambuf_iterator<char>(f), std::istreambuf_iterator<char>());
  }

 private:
  std::string path_;
};

}  // namespace pare::test
