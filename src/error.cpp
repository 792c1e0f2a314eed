#include "pare/error.h"

#include "internal/utf8.h"

namespace pare {

std::string Error::one_line(const std::string& message) { return internal::printable(message); }

std::string format_message(const Location& where, const std::string& what,
                           const std::string& hint) {
  std::string out;
  if (!where.file.empty()) {
    out += where.file;
    if (where.line > 0) {
      out += ':' + std::to_string(where.line);
      if (where.column > 0) out += ':' + std::to_string(where.column);
    }
    out += ": ";
  }
  out += what;
  if (!hint.empty()) out += " (" + hint + ")";
  return out;
}

void throw_input_error(const Location& where, const std::string& what, const std::string& hint) {
  throw Error(ErrorKind::kInput, format_message(where, what, hint));
}

void throw_usage_error(const std::string& what, const std::string& hint) {
  throw Error(ErrorKind::kUsage, format_message({}, what, hint));
}

void throw_output_error(const std::string& path, const std::string& what,
                        const std::string& hint) {
  throw Error(ErrorKind::kOutput, format_message({path}, what, hint));
}

}  // namespace pare
