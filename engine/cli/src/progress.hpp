#pragma once
// Progress on stderr for the long commands (run, audit): redrawn in place on
// a terminal, a plain line every few seconds otherwise (run only: audit and
// plan show it on a terminal only). Thread-safe: audit reports from its
// worker threads.
#include "commands.hpp"
#include "covergrid/engine/estimate.hpp"

#include <fmt/format.h>

#include <chrono>
#include <mutex>
#include <ostream>
#include <string>

namespace covergrid::cli {

class Progress {
 public:
  /// `unit` names what is counted ("cells", "n").
  Progress(std::ostream& err, bool quiet, bool tty, std::string unit = "cells")
      : err_(err),
        quiet_(quiet),
        tty_(tty),
        unit_(std::move(unit)),
        start_(std::chrono::steady_clock::now()),
        last_(start_) {}

  /// `done` of `total` units; `fraction` is the share of the work done when
  /// units differ in cost (negative: done / total). The rate and the time
  /// left follow the fraction.
  void update(std::size_t done, std::size_t total, double fraction = -1) {
    if (quiet_) return;
    const std::lock_guard<std::mutex> lock(mutex_);
    const auto now = std::chrono::steady_clock::now();
    if (!started_) {
      // The rate counts from the start of the run; resumed units do not count.
      start_done_ = resumed;
      started_ = true;
    }
    const double since_last = std::chrono::duration<double>(now - last_).count();
    if (done < total && (tty_ ? drawn_ && since_last < 0.2 : since_last < 5.0)) return;
    last_ = now;
    drawn_ = true;
    const double elapsed = std::chrono::duration<double>(now - start_).count();
    const double frac = fraction >= 0 ? fraction
                        : total       ? static_cast<double>(done) / static_cast<double>(total)
                                      : 1.0;
    const double start_frac = total ? static_cast<double>(start_done_) / static_cast<double>(total) : 0.0;
    const double rate = elapsed > 0 ? static_cast<double>(done - start_done_) / elapsed : 0.0;
    const double frac_rate = elapsed > 0 ? (frac - (fraction >= 0 ? 0.0 : start_frac)) / elapsed : 0.0;
    const double left = frac_rate > 0 ? (1.0 - frac) / frac_rate : 0.0;
    std::string line;
    if (tty_) {
      const int bar = 28, filled = static_cast<int>(frac * bar);
      line = fmt::format("\r[{}{}] {:5.1f}%  {}/{} {}  {:.3g} {}/s  {} left  ", std::string(filled, '#'),
                         std::string(bar - filled, '.'), 100 * frac, done, total, unit_, rate, unit_,
                         duration(left));
    } else {
      line = fmt::format("progress: {}/{} {} ({:.1f}%), {:.3g} {}/s, about {} left\n", done, total, unit_,
                         100 * frac, rate, unit_, duration(left));
    }
    err_ << line << std::flush;
  }
  /// Ends the redrawn line (a terminal).
  void done() {
    const std::lock_guard<std::mutex> lock(mutex_);
    if (!quiet_ && tty_ && started_) err_ << '\n';
  }

  std::size_t resumed = 0;  // units already done when the run started

 private:
  static std::string duration(double s) {
    if (s < 90) return fmt::format("{:.0f}s", s);
    if (s < 5400) return fmt::format("{:.0f}min", s / 60);
    return fmt::format("{:.1f}h", s / 3600);
  }
  std::ostream& err_;
  bool quiet_, tty_;
  std::string unit_;
  bool started_ = false, drawn_ = false;
  std::chrono::steady_clock::time_point start_, last_;
  std::size_t start_done_ = 0;
  std::mutex mutex_;
};

/// "about 3 min on 2 threads (rough; from timing 6 n on one thread)".
inline std::string work_estimate_text(const engine::WorkEstimate& e) {
  return fmt::format("{} on {} thread{} (rough; from timing {} n on one thread, the largest {})",
                     engine::duration_words(e.seconds), e.threads, e.threads == 1 ? "" : "s", e.probes,
                     e.largest_probe);
}

/// Refuses work estimated above the large-run threshold (2 hours, as for
/// `run`) without --yes; `narrow` says how to make it smaller.
inline void check_large_work(const char* command, const engine::WorkEstimate& e, bool yes,
                             const std::string& narrow) {
  if (!e.large() || yes) return;
  throw InputError(
      "--yes",
      fmt::format("this {} is large: {} (the limit without --yes: {} of wall time); {}, "
                  "or run again with --yes to start it",
                  command, work_estimate_text(e), engine::duration_words(engine::large_run_seconds), narrow));
}

/// The estimate is shown on a terminal, and anywhere when it is this long.
inline constexpr double show_estimate_seconds = 10;

}  // namespace covergrid::cli
