#pragma once
/// The plan: how a scenario's cells (model, n, p) are cut into chunks. A chunk
/// is a block of consecutive n rows times a block of consecutive p points of
/// one model; chunks are numbered model-major, then n-block, then p-block.
/// The chunk shape is also the cube's HDF5 chunk shape, so every write covers
/// whole storage chunks. The cut depends only on the grid's sizes, never on
/// threads, shards or ranks.
#include "covergrid/engine/scenario.hpp"

#include <cstddef>
#include <vector>

namespace covergrid::engine {

struct ChunkSpec {
  std::size_t id = 0;
  std::size_t model = 0;
  std::size_t n_begin = 0, n_count = 0;
  std::size_t p_begin = 0, p_count = 0;
};

struct Plan {
  std::size_t n_block = 1;  // rows per chunk (the last block may be shorter)
  std::size_t p_block = 1;  // p points per chunk (idem)
  std::vector<ChunkSpec> chunks;
};

/// Cells per chunk the plan aims at (p-block first, then as many n rows as fit).
inline constexpr std::size_t plan_target_cells = 2048;

Plan make_plan(const Scenario& scenario, std::size_t target_cells = plan_target_cells);

}  // namespace covergrid::engine
