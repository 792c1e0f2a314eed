// Errors the library reports to its caller. The library never prints or exits; the command-line
// layer turns an Error into one line on stderr and the exit code of its kind (SPEC §6).
#pragma once

#include <cstdint>    // std::int64_t
#include <stdexcept>  // std::runtime_error
#include <string>     // std::string

namespace pare {

/// What went wrong, which is also the process exit code the command line uses.
enum class ErrorKind : int {
  kOther = 1,   ///< anything else (a bug, a failed allocation)
  kUsage = 2,   ///< bad command line: unknown option, bad option value
  kInput = 3,   ///< bad input data
  kOutput = 4,  ///< cannot write an output
};

/// An error with a kind and a message already formatted as `FILE:LINE:COLUMN: what (what to do)`.
/// The message is kept to one printable line: line breaks, control characters and bytes that
/// are not UTF-8 (quoted from a damaged file, say) are shown escaped (\n, \xNN).
class Error : public std::runtime_error {
 public:
  Error(ErrorKind kind, const std::string& message) : std::runtime_error(one_line(message)), kind_(kind) {}
  ErrorKind kind() const noexcept { return kind_; }

 private:
  static std::string one_line(const std::string& message);
  ErrorKind kind_;
};

/// Where in an input file a problem sits. `line` and `column` are 1-based; 0 means unknown.
struct Location {
  std::string file;
  std::int64_t line = 0;
  std::int64_t column = 0;
};

/// Formats `FILE:LINE:COLUMN: what` (omitting the parts that are unknown) and appends
/// ` (hint)` when a hint is given.
std::string format_message(const Location& where, const std::string& what,
                           const std::string& hint = {});

/// Throws an input error (exit code 3) at `where`.
[[noreturn]] void throw_input_error(const Location& where, const std::string& what,
                                    const std::string& hint = {});

/// Throws a usage error (exit code 2).
[[noreturn]] void throw_usage_error(const std::string& what, const std::string& hint = {});

/// Throws an output error (exit code 4) about `path`.
[[noreturn]] void throw_output_error(const std::string& path, const std::string& what,
                                     const std::string& hint = {});

}  // namespace pare
