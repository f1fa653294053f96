#pragma once
/// The sink interface: where the engine hands its results. output/ implements
/// it with the HDF5 cube; tests implement it in memory.
#include "covergrid/engine/metrics.hpp"
#include "covergrid/engine/plan.hpp"

#include <array>
#include <vector>

namespace covergrid::engine {

/// Results of one chunk. Arrays are laid out [combo][n][p] (combo = side-major,
/// then level, then method), exactly the cube's hyperslab order.
struct ChunkResult {
  ChunkSpec spec;
  std::size_t combos = 0;
  bool has_exact = false;
  std::array<std::vector<double>, metric_count> exact;
  /// Continuous-range statistics per [combo][n], present in the chunk whose
  /// p_begin is 0 (they depend on the whole row, not on its p points):
  /// index i holds Stat(grid_stat_count + i).
  bool has_row_stats = false;
  std::array<std::vector<double>, stat_count - grid_stat_count> row_stats;
  /// Grid statistics per [combo][n] (Stat 0 .. grid_stat_count-1), present
  /// when the chunk spans whole rows of p; otherwise the run computes them at
  /// the end from read_rows() and hands them to write_grid_stats().
  bool has_grid_stats = false;
  std::array<std::vector<double>, grid_stat_count> grid_stats;
};

class ResultSink {
 public:
  virtual ~ResultSink() = default;
  /// 1 for every chunk already complete in the output (resume), else 0;
  /// size = number of chunks in the plan.
  virtual std::vector<char> completed() = 0;
  /// Stores one chunk's results (in any order of chunks).
  virtual void write_chunk(const ChunkResult& result) = 0;
  /// Makes what was written durable and records those chunks as complete.
  virtual void checkpoint() = 0;
  /// Reads back one exact metric for rows [n_begin, n_begin + n_count) of a
  /// model and p points [p_begin, p_begin + p_count), into out laid out
  /// [combo][n][p].
  virtual void read_rows(Metric metric, std::size_t model, std::size_t n_begin, std::size_t n_count,
                         std::size_t p_begin, std::size_t p_count, std::vector<double>& out) = 0;
  /// Stores the grid statistics (Stat 0 .. grid_stat_count-1) for those rows,
  /// laid out [stat][combo][n].
  virtual void write_grid_stats(std::size_t model, std::size_t n_begin, std::size_t n_count,
                                const std::vector<double>& stats) = 0;
  /// Marks the output complete and publishes it (rename from the temporary name).
  virtual void finish() = 0;
};

}  // namespace covergrid::engine
