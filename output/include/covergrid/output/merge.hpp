#pragma once
/// Merging shard cubes (run --shard K/N) into the cube a single run writes.
///
/// Every input is checked before anything is written: each must be a
/// complete shard cube of this covergrid's tool and format version; all must
/// be shards of one scenario (same scenario_sha256), cut into the same N, with
/// the chunk layout and shard cut this covergrid computes for that scenario;
/// together they must hold every chunk exactly once. Any failure is an
/// InputError naming the files (exit 2), and nothing is written. Then the
/// chunks are replayed one at a time, in plan order, from the shard cubes
/// into the same cube assembly and summary code a single run uses, under
/// OUT.partial, renamed to OUT when complete. Memory holds one chunk at a
/// time (plus the small per-row statistics), whatever the grid's size.
#include "covergrid/engine/scenario.hpp"

#include <functional>
#include <string>
#include <vector>

namespace covergrid::output {

/// Builds a scenario from the text stored in a cube (the front end passes the
/// scenario loader; output/ does not read TOML).
using ScenarioLoader =
    std::function<engine::Scenario(const std::string& text, const std::string& source_name)>;

struct MergeReport {
  std::size_t shards = 0, chunks = 0;
};

/// Merges `shards` into `out_path` (refused if it exists, unless
/// `overwrite`). On return `scenario` is the merged scenario with cube_path =
/// out_path.
MergeReport merge_shards(const std::vector<std::string>& shards, const std::string& out_path, bool overwrite,
                         const ScenarioLoader& load, engine::Scenario& scenario);

}  // namespace covergrid::output
