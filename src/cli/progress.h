// The progress line of long steps on stderr: redrawn in place on a terminal (step, percentage,
// rate, time left), one summary line per step otherwise.
#pragma once

#include <cstdint>      // std::int64_t
#include <mutex>        // std::mutex
#include <ostream>      // std::ostream
#include <string>       // std::string
#include <string_view>  // std::string_view

#include "pare/progress.h"

namespace pare::cli {

class ProgressPrinter final : public ProgressListener {
 public:
  /// Installs itself as the progress listener until destroyed. `terminal` selects the redrawn line.
  ProgressPrinter(std::ostream& err, bool terminal);
  ~ProgressPrinter() override;
  ProgressPrinter(const ProgressPrinter&) = delete;
  ProgressPrinter& operator=(const ProgressPrinter&) = delete;

  void begin(std::string_view step, std::int64_t total, std::string_view unit) override;
  void update(std::int64_t done) override;
  void end(std::int64_t done, double seconds) override;
  void abandon() override;

 private:
  std::string amount(double units) const;  // "397.3 MB", "49,608 features"
  void clear_line();

  std::ostream& err_;
  bool terminal_;
  std::mutex mutex_;
  std::string step_, unit_;
  std::int64_t total_ = 0;
  double start_ = 0;
  std::size_t drawn_ = 0;  // characters of the line drawn last
};

}  // namespace pare::cli
