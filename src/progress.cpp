#include "pare/progress.h"

#include <exception>  // std::uncaught_exceptions

namespace pare {

namespace {

std::atomic<ProgressListener*> current{nullptr};
thread_local int quiet_depth = 0;

constexpr std::int64_t kInterval = 100'000'000;  // ns between updates

std::int64_t now_ns() {
  return std::chrono::duration_cast<std::chrono::nanoseconds>(std::chrono::steady_clock::now().time_since_epoch())
      .count();
}

}  // namespace

void set_progress_listener(ProgressListener* listener) { current.store(listener); }

QuietProgress::QuietProgress() { ++quiet_depth; }
QuietProgress::~QuietProgress() { --quiet_depth; }

ProgressStep::ProgressStep(std::string_view step, std::int64_t total, std::string_view unit)
    : listener_(quiet_depth > 0 ? nullptr : current.load()), start_(std::chrono::steady_clock::now()), uncaught_(std::uncaught_exceptions()) {
  if (listener_) {
    listener_->begin(step, total, unit);
    next_update_.store(now_ns() + kInterval);
  }
}

ProgressStep::~ProgressStep() {
  if (!listener_) return;
  if (std::uncaught_exceptions() > uncaught_) {
    listener_->abandon();
    return;
  }
  listener_->end(done_.load(), std::chrono::duration<double>(std::chrono::steady_clock::now() - start_).count());
}

void ProgressStep::add(std::int64_t units) {
  const std::int64_t done = done_.fetch_add(units) + units;
  if (!listener_) return;
  std::int64_t due = next_update_.load(std::memory_order_relaxed);
  const std::int64_t now = now_ns();
  // One thread wins the right to report this interval.
  if (now >= due && next_update_.compare_exchange_strong(due, now + kInterval)) listener_->update(done);
}

}  // namespace pare
