#pragma once
/// Shards: a deterministic split of a plan's chunks into N parts for job
/// arrays (`run --shard K/N`, then `merge`). Shard K holds one contiguous run
/// of chunk ids in plan order, cut so that the estimated costs of the parts
/// are as even as contiguous cuts allow. The split depends only on the plan,
/// the scenario's sizes and N: never on the machine, threads or time.
#include "covergrid/engine/plan.hpp"
#include "covergrid/engine/scenario.hpp"

#include <cstddef>
#include <string>
#include <vector>

namespace covergrid::engine {

/// Shard `index` (1-based) of `count`.
struct ShardSpec {
  std::size_t index = 1;
  std::size_t count = 1;
  /// "K/N", the cube's `shard` attribute.
  std::string label() const { return std::to_string(index) + "/" + std::to_string(count); }
};

/// Parses "K/N" (1 <= K <= N). Errors are InputErrors naming `option`.
ShardSpec parse_shard(const std::string& text, const std::string& option = "--shard");

/// Estimated relative cost of a chunk: per cell, sqrt(n) + a constant for
/// each source (the pmf window has O(sqrt n) terms) plus a term in the Monte
/// Carlo replicates; per row, its share of the interval tables (O(n)) and, in
/// the chunk with p_begin = 0, the continuous infimum (measured to grow like n^1.3). Only the ratios
/// between chunks matter.
double chunk_cost(const Scenario& scenario, const ChunkSpec& chunk);

/// The chunk ids of shard `spec` (increasing, contiguous). Throws InputError
/// naming `option` when N exceeds the number of chunks (a shard would be
/// empty).
std::vector<std::size_t> shard_chunks(const Scenario& scenario, const Plan& plan, const ShardSpec& spec,
                                      const std::string& option = "--shard");

/// A shard and its chunk ids, as a shard run and its cube carry them.
struct ShardSelection {
  ShardSpec spec;
  std::vector<std::size_t> chunks;
};

/// Where shard K/N of a cube is written: "dir/name.h5" becomes
/// "dir/name.shard-K-of-N.h5", K zero-padded to the width of N so that the
/// files sort in shard order.
std::string shard_cube_path(const std::string& cube_path, const ShardSpec& spec);

}  // namespace covergrid::engine
