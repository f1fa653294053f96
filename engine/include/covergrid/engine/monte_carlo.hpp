#pragma once
/// Monte Carlo evaluation of a cell (README, "Monte Carlo"): R replicates drawn
/// once from the cell's counter-based stream, tallied into a histogram over
/// x, and reduced against every method's interval table (common random
/// numbers: all methods, levels and sides see the same draws, so their
/// differences are paired). The cost is one draw per replicate plus one pass
/// over the histogram per table, whatever the number of methods.
#include "covergrid/engine/binomial_window.hpp"
#include "covergrid/engine/sampling_model.hpp"
#include "covergrid/engine/interval_table.hpp"
#include "covergrid/engine/random.hpp"

#include <array>
#include <cstdint>
#include <map>
#include <memory>
#include <utility>
#include <string_view>
#include <vector>

namespace covergrid::engine {

/// The Monte Carlo metrics: the exact ones plus the coverage's standard error.
inline constexpr std::size_t mc_metric_count = 8;
inline constexpr std::array<std::string_view, mc_metric_count> mc_metric_names = {
    "coverage", "miss_low", "miss_high", "width", "width_sd", "degenerate", "overshoot", "coverage_se"};
using McMetrics = std::array<double, mc_metric_count>;

/// How many replicates a cell gets.
struct ReplicateRule {
  std::uint64_t replicates = 0;      // fixed count, or the first round when target_se > 0
  double target_se = 0;              // 0 = fixed count
  std::uint64_t max_replicates = 0;  // cap when target_se > 0
};

/// The draws of one cell as counts over the window's x and, when the cell's
/// cluster counts were drawn, counts over (x, sum of squared cluster counts).
struct CellDraws {
  std::vector<std::uint64_t> counts;  // counts[x - window.lo]
  std::uint64_t replicates = 0;
  std::map<std::pair<int, std::int64_t>, std::uint64_t> samples;  // empty unless clusters were drawn
  int clusters = 0, cluster_size = 1;
};

/// The model's cluster sampler at (n, p) when some table needs the cluster
/// counts (IntervalTable::clustered), else nullptr.
std::unique_ptr<ClusterSampler> cluster_sampler_for(const SamplingModel& model, int n, double p,
                                                    const std::vector<const IntervalTable*>& tables);

/// Draws replicates [0, rule.replicates) (and, with a target standard error,
/// further rounds doubling the count until every table's estimated standard
/// error is at most the target or the cap is reached) into `draws`.
/// With a cluster sampler, each replicate's cluster counts are drawn too,
/// given its x, from the stream's detail uniforms (CellStream::detail_uniforms),
/// and tallied by (x, sum of squares); the x draws are the same either way.
/// The stopping rule uses (k + 1)/(R + 2) for each coverage so that a run of
/// all-covered replicates does not stop it at a spurious zero error.
void simulate_cell(const ProbabilityWindow& window, const CellStream& stream, const ReplicateRule& rule,
                   const std::vector<const IntervalTable*>& tables, double p, CellDraws& draws,
                   const ClusterSampler* clusters = nullptr);

/// Every metric of a table from the draws. NaN for an unsupported table and
/// for a table that needs cluster counts the draws do not have.
McMetrics mc_metrics(const IntervalTable& table, const ProbabilityWindow& window, const CellDraws& draws,
                     double p);

}  // namespace covergrid::engine

namespace covergrid::engine {

/// The paired Monte Carlo difference of two methods' coverage in one cell:
/// both judged on the same R draws (common random numbers), so the
/// difference's standard error comes from the discordant replicates:
/// D = 1[A covers] - 1[B covers], se = sqrt((P(D != 0) - E[D]^2) / R).
struct PairedCell {
  double coverage_a = 0, coverage_b = 0;
  double difference = 0, difference_se = 0;
  std::uint64_t replicates = 0;
};

/// Re-draws the cell (model index, n, p index) of a scenario with `seed` for
/// `replicates` replicates (exactly the draws the run made) and pairs tables a and b.
PairedCell paired_difference(std::uint64_t seed, std::size_t model, int n, std::size_t p_index, double p,
                             std::uint64_t replicates, const IntervalTable& a, const IntervalTable& b,
                             const SamplingModel& sampling = binomial_model());
// (Either table may need the cluster counts: the cell's clusters are then drawn.)

}  // namespace covergrid::engine
