#include "covergrid/engine/plan.hpp"

#include <algorithm>
#include <stdexcept>
#include <string>

namespace covergrid::engine {

ChunkList::ChunkList(std::size_t models, std::size_t rows, std::size_t points, std::size_t n_block,
                     std::size_t p_block)
    : models_(models),
      rows_(rows),
      points_(points),
      n_block_(std::max<std::size_t>(1, n_block)),
      p_block_(std::max<std::size_t>(1, p_block)),
      n_blocks_((rows + n_block_ - 1) / n_block_),
      p_blocks_((points + p_block_ - 1) / p_block_) {}

ChunkSpec ChunkList::operator[](std::size_t id) const {
  // Model-major, then n-block, then p-block.
  const std::size_t per_model = n_blocks_ * p_blocks_;
  const std::size_t m = id / per_model, in_model = id % per_model;
  const std::size_t nb = (in_model / p_blocks_) * n_block_, pb = (in_model % p_blocks_) * p_block_;
  return {id, m, nb, std::min(n_block_, rows_ - nb), pb, std::min(p_block_, points_ - pb)};
}

ChunkSpec ChunkList::at(std::size_t id) const {
  if (id >= size())
    throw std::out_of_range("chunk " + std::to_string(id) + " is beyond the plan's " +
                            std::to_string(size()));
  return (*this)[id];
}

Plan make_plan(const Scenario& scenario, std::size_t target_cells) {
  Plan plan;
  const std::size_t rows = scenario.n.size();
  const std::size_t points = scenario.p.size();
  // A simulated cell costs about R draws (some 6 ns each) against about a
  // microsecond for an exact one: chunks of a Monte Carlo run hold fewer
  // cells, so that a grid of few cells and many replicates still spreads
  // over the threads and ranks (never below 256 cells, or the target when
  // smaller: tinier storage chunks cost more to read than they save).
  std::size_t target = target_cells;
  if (scenario.replicates > 0) {
    const double weight = 1.0 + static_cast<double>(scenario.replicates) / 1000.0;
    target = std::max(std::min<std::size_t>(256, target_cells),
                      static_cast<std::size_t>(static_cast<double>(target_cells) / weight));
  }
  plan.p_block = std::max<std::size_t>(1, std::min(points, target));
  plan.n_block = std::max<std::size_t>(1, std::min(rows, target / plan.p_block));
  plan.chunks = ChunkList(scenario.models.size(), rows, points, plan.n_block, plan.p_block);
  return plan;
}

}  // namespace covergrid::engine
