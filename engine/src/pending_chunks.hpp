#pragma once
// Internal to the engine: the chunks a run still has to compute, shared by
// the one-process scheduler (run.cpp) and distributed dealing (dealing.cpp).
#include "covergrid/engine/plan.hpp"
#include "covergrid/engine/run.hpp"

#include <cstddef>
#include <vector>

namespace covergrid::engine::detail {

struct PendingChunks {
  std::vector<std::size_t> todo;  // chunk ids still to compute, in plan order
  std::size_t cells_done = 0;     // cells of the selected chunks already complete
  std::size_t cells_total = 0;    // cells of the selected chunks
};

/// The chunks of `plan` selected by options.only_chunks (all without it)
/// that `done` (the sink's completed()) lacks; counts the selected and the
/// resumed chunks into `report`.
PendingChunks pending_chunks(const Plan& plan, const std::vector<char>& done, const RunOptions& options,
                             RunReport& report);

}  // namespace covergrid::engine::detail
