#include "cli/progress.h"

#include <chrono>  // std::chrono::steady_clock
#include <cmath>   // std::round

#include "pare/text.h"

namespace pare::cli {

namespace {

double now_seconds() {
  return std::chrono::duration<double>(std::chrono::steady_clock::now().time_since_epoch()).count();
}

std::string duration(double seconds) {
  if (seconds < 60) return fixed(seconds, seconds < 10 ? 1 : 0) + " s";
  const auto s = static_cast<std::int64_t>(std::round(seconds));
  if (s < 3600) return std::to_string(s / 60) + " min " + std::to_string(s % 60) + " s";
  return std::to_string(s / 3600) + " h " + std::to_string(s % 3600 / 60) + " min";
}

}  // namespace

ProgressPrinter::ProgressPrinter(std::ostream& err, bool terminal) : err_(err), terminal_(terminal) {
  set_progress_listener(this);
}

ProgressPrinter::~ProgressPrinter() { set_progress_listener(nullptr); }

std::string ProgressPrinter::amount(double units) const {
  if (unit_ == "bytes") return fixed(units / 1e6, 1) + " MB";
  return thousands(static_cast<std::int64_t>(units)) + " " + unit_;
}

void ProgressPrinter::clear_line() {
  if (drawn_ == 0) return;
  err_ << '\r' << std::string(drawn_, ' ') << '\r';
  drawn_ = 0;
}

void ProgressPrinter::begin(std::string_view step, std::int64_t total, std::string_view unit) {
  const std::lock_guard lock(mutex_);
  step_ = step;
  unit_ = unit;
  total_ = total;
  start_ = now_seconds();
}

void ProgressPrinter::update(std::int64_t done) {
  if (!terminal_) return;
  const std::lock_guard lock(mutex_);
  const double elapsed = now_seconds() - start_;
  if (elapsed < 0.5) return;  // short steps are not worth a line
  std::string line = "pare: " + step_;
  if (total_ > 0) line += "  " + fixed(100.0 * static_cast<double>(done) / static_cast<double>(total_), 0) + "%";
  const double rate = static_cast<double>(done) / elapsed;
  line += "  " + amount(rate) + "/s";
  if (total_ > 0 && rate > 0 && done < total_)
    line += "  about " + duration(static_cast<double>(total_ - done) / rate) + " left";
  const std::size_t width = line.size();
  if (width < drawn_) line += std::string(drawn_ - width, ' ');
  err_ << '\r' << line << std::flush;
  drawn_ = width;
}

void ProgressPrinter::end(std::int64_t done, double seconds) {
  const std::lock_guard lock(mutex_);
  clear_line();
  std::string line = "pare: " + step_ + ": " + amount(static_cast<double>(done)) + " in " + duration(seconds);
  if (seconds > 0 && done > 0) line += " (" + amount(static_cast<double>(done) / seconds) + "/s)";
  err_ << line << '\n' << std::flush;
}

void ProgressPrinter::abandon() {
  const std::lock_guard lock(mutex_);
  clear_line();
  err_ << std::flush;
}

}  // namespace pare::cli
