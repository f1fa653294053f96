#include "covergrid/engine/plan.hpp"

#include <algorithm>

namespace covergrid::engine {

Plan make_plan(const Scenario& scenario, std::size_t target_cells) {
  Plan plan;
  const std::size_t rows = scenario.n.size();
  const std::size_t points = scenario.p.size();
  plan.p_block = std::max<std::size_t>(1, std::min(points, target_cells));
  plan.n_block = std::max<std::size_t>(1, std::min(rows, target_cells / plan.p_block));
  std::size_t id = 0;
  for (std::size_t m = 0; m < scenario.models.size(); ++m)
    for (std::size_t nb = 0; nb < rows; nb += plan.n_block)
      for (std::size_t pb = 0; pb < points; pb += plan.p_block)
        plan.chunks.push_back(
            {id++, m, nb, std::min(plan.n_block, rows - nb), pb, std::min(plan.p_block, points - pb)});
  return plan;
}

}  // namespace covergrid::engine
