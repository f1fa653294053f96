#pragma once
/// What a run will cost before it starts: wall time from a short calibration
/// (a few of the plan's cheapest sample chunks timed on one thread, scaled by
/// the shard cost model `chunk_cost` and the thread count, plus the cube's
/// assembly at a measured rate per byte), and the size of
/// the data it writes. `run --dry-run` prints it; `run` prints it at the start
/// and refuses, without --yes, a run above the large-run thresholds below.
#include "covergrid/engine/plan.hpp"
#include "covergrid/engine/scenario.hpp"

#include <cstdint>
#include <functional>
#include <span>
#include <string>
#include <vector>

namespace covergrid::engine {

/// Runs estimated above either threshold need --yes: 2 hours of wall time on
/// the threads given, or 20 GB of cube data (uncompressed). Chosen so that
/// every bundled scenario and every interactive exploration stays below, and
/// a mistyped grid (a 10^9-cell range) is caught before it fills a disk.
inline constexpr double large_run_seconds = 2 * 3600.0;
inline constexpr double large_run_bytes = 20e9;

struct RunEstimate {
  std::size_t cells = 0;           // cells still to compute
  double seconds = 0;              // wall time on `threads` threads (rough: within ~2x)
  double calibration_seconds = 0;  // time the calibration took
  std::size_t chunks_timed = 0;
  double cube_bytes = 0;     // the cube's datasets, uncompressed (the HDF5 file is about as large)
  double journal_bytes = 0;  // the journal while the run is in progress (uncompressed)
  int threads = 1;

  bool large() const { return seconds > large_run_seconds || cube_bytes > large_run_bytes; }
};

/// Estimates computing the chunks of `plan` listed in `todo` (chunk ids).
/// Times at most a few chunks, about a second in all; `threads` = 0 means
/// every hardware thread. With [evaluate] target_se the replicates per cell
/// grow as needed, so the time is a lower bound (the first round only).
RunEstimate estimate_run(const Scenario& scenario, const Plan& plan, const std::vector<std::size_t>& todo,
                         int threads);

/// What a job of independent per-n steps will cost: an audit claim (every n
/// of the claim) or a sample-size plan (at most every n of its range). One
/// n's cost is fitted as cost(n) = seconds_at_ref * (n / ref_n)^exponent
/// from timed probes of the job's own step, and summed over every n.
struct WorkEstimate {
  double seconds = 0;              // wall time on `threads` threads (rough: within ~2x)
  double calibration_seconds = 0;  // time the probes took
  std::size_t probes = 0;          // distinct n timed
  int largest_probe = 0;           // the largest n timed
  int ref_n = 1;                   // the fit: cost(n) = seconds_at_ref * (n / ref_n)^exponent
  double seconds_at_ref = 0, exponent = 1;
  int threads = 1;

  /// One n's fitted cost on one thread, in seconds.
  double cost(int n) const;
  /// Adds another job's estimate (several claims or methods run one after
  /// the other): seconds and probes add up, the largest probe is kept; the
  /// fit stays this one's.
  void add(const WorkEstimate& other);
  bool large() const { return seconds > large_run_seconds; }
};

/// The clock the probes read, in seconds; replaceable so that tests can drive
/// the fit with a synthetic cost instead of wall time.
using Clock = std::function<double()>;
double steady_seconds();

/// Estimates running `step(n)` for every n of `ns` (ascending) spread over
/// `threads` threads (0 = every hardware thread), plus `extra_seconds` of
/// one-thread work that the caller costed itself (spread over the threads too). Probes, on one thread:
/// the smallest n first, then n about four times the last one, never an n
/// that the last probe predicts (growing like n^2) to overrun the budget of
/// half a second, and none once the probes have taken 2 % of the per-n work.
/// A step shorter than 0.2 ms is repeated to time it. The exponent is fitted
/// through the two largest probes (clamped to [0, 3]; 1 with one probe).
WorkEstimate estimate_per_n(std::span<const int> ns, int threads, const std::function<void(int)>& step,
                            double extra_seconds = 0, const Clock& clock = steady_seconds);

/// "about 3.2 h on 2 threads", "about 40 s on 2 threads", "under a second".
std::string duration_words(double seconds);
/// "1.3 GB", "830 MB", "12 kB".
std::string size_words(double bytes);

}  // namespace covergrid::engine
