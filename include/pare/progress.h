// Progress of long steps (reading, scoring, pruning, PCA), reported to whoever listens. The
// library never prints; the command-line tool installs a listener that draws a progress line.
#pragma once

#include <atomic>       // std::atomic
#include <chrono>       // std::chrono::steady_clock
#include <cstdint>      // std::int64_t
#include <string>       // std::string
#include <string_view>  // std::string_view

namespace pare {

/// Receives the progress of long steps. Calls come from worker threads, one step at a time;
/// implementations must be thread-safe.
class ProgressListener {
 public:
  virtual ~ProgressListener() = default;
  /// A step starts: `total` units (bytes, features, candidates, blocks) are expected.
  virtual void begin(std::string_view step, std::int64_t total, std::string_view unit) = 0;
  /// `done` of the total units are done (at most about ten calls a second).
  virtual void update(std::int64_t done) = 0;
  /// The step finished after `done` units and `seconds`.
  virtual void end(std::int64_t done, double seconds) = 0;
  /// The step stopped on an error.
  virtual void abandon() = 0;
};

/// Installs `listener` (not owned; nullptr for none). Call it between steps, not during one.
void set_progress_listener(ProgressListener* listener);

/// A long step being reported, from its construction to its destruction (library side). add()
/// may be called from any thread.
/// While one lives, the ProgressSteps started on its thread report nothing: the inner steps of work
/// that reports for itself (the pruning of each stability subset, run side by side).
class QuietProgress {
 public:
  QuietProgress();
  ~QuietProgress();
  QuietProgress(const QuietProgress&) = delete;
  QuietProgress& operator=(const QuietProgress&) = delete;
};

class ProgressStep {
 public:
  ProgressStep(std::string_view step, std::int64_t total, std::string_view unit);
  ProgressStep(const ProgressStep&) = delete;
  ProgressStep& operator=(const ProgressStep&) = delete;
  ~ProgressStep();

  void add(std::int64_t units);

 private:
  ProgressListener* listener_;
  std::atomic<std::int64_t> done_{0};
  std::atomic<std::int64_t> next_update_{0};  // steady-clock nanoseconds
  std::chrono::steady_clock::time_point start_;
  int uncaught_;
};

}  // namespace pare
