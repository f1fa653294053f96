#include "covergrid/engine/shard.hpp"

#include "covergrid/engine/error.hpp"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <filesystem>

namespace covergrid::engine {

namespace {

// Relative cost weights (see chunk_cost), in units of one step of a cell's
// pmf window. Fitted to single-chunk times from `covergrid_bench shard-cost`
// (n = 10..100000, exact and Monte Carlo) on the project's two-core machine;
// they are rough (within about 1.5x there), and a wrong weight only
// unbalances the shards, it never changes a result.
constexpr double cell_constant = 4.0;      // per cell and source, beside sqrt(n)
constexpr double replicate_weight = 0.07;  // per Monte Carlo replicate of a cell
constexpr double table_weight = 57.0;   // per x of a row's interval tables (x = 0..n), shared by its chunks
constexpr double infimum_weight = 8.0;  // times n^1.3: a row's continuous infimum, in its p_begin = 0 chunk
constexpr double infimum_power = 1.3;   // the infimum sweep grew like n^1.3 over n = 1e3..1e5 in the fit

bool parse_count(const std::string& text, std::size_t& out) {
  if (text.empty() || text.size() > 9) return false;
  const auto [end, ec] = std::from_chars(text.data(), text.data() + text.size(), out);
  return ec == std::errc() && end == text.data() + text.size();
}

}  // namespace

ShardSpec parse_shard(const std::string& text, const std::string& option) {
  const std::string where = option + " " + text;
  const auto slash = text.find('/');
  ShardSpec spec;
  if (slash == std::string::npos || !parse_count(text.substr(0, slash), spec.index) ||
      !parse_count(text.substr(slash + 1), spec.count))
    throw InputError(where, "expected K/N with whole numbers, e.g. 3/16 (shard 3 of 16)");
  if (spec.count < 1) throw InputError(where, "N (the number of shards) must be at least 1");
  if (spec.index < 1 || spec.index > spec.count)
    throw InputError(where, "K must be from 1 to N = " + std::to_string(spec.count));
  return spec;
}

double chunk_cost(const Scenario& scenario, const ChunkSpec& chunk) {
  const double points = static_cast<double>(chunk.p_count);
  const double share = points / static_cast<double>(scenario.p.size());
  const double sources = (scenario.exact ? 1.0 : 0.0) + (scenario.replicates > 0 ? 1.0 : 0.0);
  const double mc = static_cast<double>(scenario.replicates) * replicate_weight;
  const bool infimum = scenario.exact && chunk.p_begin == 0;
  double cost = 0;
  for (std::size_t i = 0; i < chunk.n_count; ++i) {
    const double n = scenario.n[chunk.n_begin + i];
    cost += points * ((std::sqrt(n) + cell_constant) * sources + mc) + share * n * table_weight +
            (infimum ? std::pow(n, infimum_power) * infimum_weight : 0.0);
  }
  return cost;
}

std::vector<std::size_t> shard_chunks(const Scenario& scenario, const Plan& plan, const ShardSpec& spec,
                                      const std::string& option) {
  const std::size_t chunks = plan.chunks.size(), N = spec.count;
  if (N > chunks)
    throw InputError(option + " " + spec.label(), "this scenario has " + std::to_string(chunks) + " chunk" +
                                                      (chunks == 1 ? "" : "s") + ", so N can be at most " +
                                                      std::to_string(chunks));
  // prefix[k] = cost of chunks 0..k-1, summed in plan order.
  std::vector<double> prefix(chunks + 1, 0.0);
  for (std::size_t k = 0; k < chunks; ++k) prefix[k + 1] = prefix[k] + chunk_cost(scenario, plan.chunks[k]);
  const double total = prefix[chunks];
  // cut[s] = number of chunks in shards 1..s. Each cut is the prefix closest
  // to s/N of the total, kept strictly increasing so no shard is empty.
  std::vector<std::size_t> cut(N + 1, 0);
  cut[N] = chunks;
  for (std::size_t s = 1; s < N; ++s) {
    const double target = total * static_cast<double>(s) / static_cast<double>(N);
    const std::size_t lo = cut[s - 1] + 1, hi = chunks - (N - s);
    std::size_t k =
        static_cast<std::size_t>(std::lower_bound(prefix.begin(), prefix.end(), target) - prefix.begin());
    if (k > lo && k <= chunks && target - prefix[k - 1] <= prefix[k] - target) --k;
    cut[s] = std::clamp(k, lo, hi);
  }
  std::vector<std::size_t> ids;
  for (std::size_t k = cut[spec.index - 1]; k < cut[spec.index]; ++k) ids.push_back(k);
  return ids;
}

std::string shard_cube_path(const std::string& cube_path, const ShardSpec& spec) {
  const std::filesystem::path p(cube_path);
  const std::string n = std::to_string(spec.count);
  std::string k = std::to_string(spec.index);
  k.insert(0, n.size() - k.size(), '0');
  const std::string tag = ".shard-" + k + "-of-" + n;
  const std::string ext = p.extension().string();
  if (ext.empty()) return cube_path + tag;
  return (p.parent_path() / (p.stem().string() + tag + ext)).string();
}

}  // namespace covergrid::engine
