#pragma once
/// The sink interface: where the engine hands its results. output/ implements
/// it with the cube (journal while running, HDF5 when complete); tests
/// implement it in memory.
#include "covergrid/engine/metrics.hpp"
#include "covergrid/engine/monte_carlo.hpp"
#include "covergrid/engine/plan.hpp"

#include <array>
#include <vector>

namespace covergrid::engine {

/// Where a figure comes from.
enum class Source { exact, mc };

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
  /// Monte Carlo metrics [combo][n][p], replicates per cell [n][p], and
  /// their grid statistics as above.
  bool has_mc = false;
  std::array<std::vector<double>, mc_metric_count> mc;
  std::vector<double> mc_replicates;
  bool has_mc_grid_stats = false;
  std::array<std::vector<double>, grid_stat_count> mc_grid_stats;
};

class ResultSink {
 public:
  virtual ~ResultSink() = default;
  /// 1 for every chunk already complete in the output (resume), else 0;
  /// size = number of chunks in the plan.
  virtual std::vector<char> completed() = 0;
  /// Stores one chunk's results (in any order of chunks).
  virtual void write_chunk(const ChunkResult& result) = 0;
  /// Records the chunks written so far as complete; a sink may make them
  /// durable against a crash of the machine here (the cube writer does so at
  /// most every few seconds).
  virtual void checkpoint() = 0;
  /// Reads back one metric (Metric index; for Source::mc the mc_metric index)
  /// for rows [n_begin, n_begin + n_count) of a model and p points
  /// [p_begin, p_begin + p_count): exactly one chunk's block. Out is laid out
  /// [combo][n][p].
  virtual void read_rows(Source source, std::size_t metric, std::size_t model, std::size_t n_begin,
                         std::size_t n_count, std::size_t p_begin, std::size_t p_count,
                         std::vector<double>& out) = 0;
  /// Stores the grid statistics (Stat 0 .. grid_stat_count-1) for those rows,
  /// laid out [stat][combo][n].
  virtual void write_grid_stats(Source source, std::size_t model, std::size_t n_begin, std::size_t n_count,
                                const std::vector<double>& stats) = 0;
  /// Marks the output complete and publishes it.
  virtual void finish() = 0;
};

}  // namespace covergrid::engine
