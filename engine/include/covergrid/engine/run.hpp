#pragma once
/// Running a scenario: plan, resume, parallel evaluation, summaries.
#include "covergrid/engine/scenario.hpp"
#include "covergrid/engine/plan.hpp"
#include "covergrid/engine/sink.hpp"

#include <atomic>
#include <cmath>
#include <cstddef>
#include <functional>
#include <optional>
#include <string>
#include <vector>

namespace covergrid::engine {

struct RunOptions {
  int threads = 0;  // 0 = all hardware threads
  /// Called at each checkpoint, one call at a time (from a worker thread):
  /// (cells done, cells total).
  std::function<void(std::size_t, std::size_t)> progress;
  /// When set and true, no further chunk is started; those in flight are
  /// written and checkpointed, then the run returns interrupted.
  const std::atomic<bool>* stop = nullptr;
  /// Cells per chunk for the plan (make_plan's target). Every run of one
  /// output must use the same value; only tests change it.
  std::size_t chunk_cells = plan_target_cells;
  /// When set, only these chunk ids are computed (a shard). The grid
  /// statistics of rows split over several chunks need every chunk, so such a
  /// run leaves them to `merge` and finishes the sink without them.
  const std::vector<std::size_t>* only_chunks = nullptr;
};

struct RunReport {
  std::size_t chunks_total = 0;
  std::size_t chunks_computed = 0;
  std::size_t chunks_resumed = 0;  // already complete in the output
  bool interrupted = false;
  /// Set when part of a distributed run failed (which rank, and why); the
  /// run then stopped like an interrupted one.
  std::string failure;
  /// Chunks computed by each rank of a distributed run (empty otherwise).
  std::vector<std::size_t> chunks_by_rank;
};

/// Runs every chunk not yet complete in `sink`, then the summaries, then
/// sink.finish(). On interruption it checkpoints and returns without finish().
RunReport run_scenario(const Scenario& scenario, ResultSink& sink, const RunOptions& options = {});

/// Hands out chunk ids and takes their results, for runs whose chunks are
/// dealt from elsewhere (the ranks of an MPI run). next() is called from one
/// thread at a time, done() likewise, possibly at the same time as next().
class ChunkFeed {
 public:
  virtual ~ChunkFeed() = default;
  /// The next chunk to compute, or nullopt when there is no more (may block).
  virtual std::optional<std::size_t> next() = 0;
  /// A computed chunk, checked for unset cells.
  virtual void done(ChunkResult&& result) = 0;
};

/// Computes the chunks `feed` hands out, in any order, on `threads` threads
/// (0 = all), up to 2 per thread in flight; rows' interval tables are shared
/// by the chunks in flight and kept for a few rows after. An exception from
/// the feed or a chunk stops it and is rethrown.
void compute_feed(const Scenario& scenario, const Plan& plan, ChunkFeed& feed, int threads);

/// What follows the chunks of a whole-scenario run: the grid statistics of
/// rows split over several chunks (read back through sink.read_rows, every
/// chunk must be complete in the sink), then sink.finish(). run_scenario
/// calls it; merge calls it on a sink that replays shard cubes.
void finish_scenario(const Scenario& scenario, const Plan& plan, ResultSink& sink);

/// Computes one chunk (exposed for tests and benchmarks).
ChunkResult compute_chunk(const Scenario& scenario, const ChunkSpec& chunk);

/// Grid statistics of one (combo, n) row, accumulated over p in order (so a
/// row can be fed block by block with the same result as in one go).
class GridAccumulator {
 public:
  void add(double coverage, double width, double miss_low, double miss_high, double p, double nominal);
  /// Writes Stat 0 .. grid_stat_count-1 into stats[0 .. grid_stat_count-1].
  void finish(double nominal, double* stats) const;

 private:
  double sum_ = 0, sq_ = 0, below_ = 0, width_ = 0, low_ = 0, high_ = 0;
  double min_ = HUGE_VAL, min_p_ = 0;
  std::size_t count_ = 0;
  bool undefined_ = false;
};

/// Grid statistics of a whole row: GridAccumulator over p[0..size).
void grid_stats(const double* coverage, const double* width, const double* miss_low, const double* miss_high,
                const std::vector<double>& p, double nominal, double* stats);

}  // namespace covergrid::engine
