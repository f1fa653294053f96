#pragma once
/// Names and order of the per-cell metrics and the per-row summary statistics.
#include <array>
#include <string_view>

namespace covergrid::engine {

enum class Metric { coverage, miss_low, miss_high, width, width_sd, degenerate, overshoot };
inline constexpr std::size_t metric_count = 7;
inline constexpr std::array<std::string_view, metric_count> metric_names = {
    "coverage", "miss_low", "miss_high", "width", "width_sd", "degenerate", "overshoot"};

/// Summary statistics per (model, side, level, method, n). The first group
/// comes from the grid values, the second from the interval table over the
/// continuous p-range [min p, max p] of the scenario.
enum class Stat {
  mean_coverage,
  min_coverage,
  min_coverage_p,
  rms_deviation,
  share_below,
  mean_width,
  mean_miss_low,
  mean_miss_high,
  inf_coverage,
  inf_coverage_p,
  inf_coverage_from,  // -1: approached from below p, +1: from above, 0: attained
  inf_refined,        // 1 where a non-contiguous covered set forced dense refinement
  mean_coverage_continuous,
};
inline constexpr std::size_t stat_count = 13;
inline constexpr std::size_t grid_stat_count = 8;  // the grid-based ones come first
inline constexpr std::array<std::string_view, stat_count> stat_names = {
    "mean_coverage",     "min_coverage",  "min_coverage_p",          "rms_deviation", "share_below",
    "mean_width",        "mean_miss_low", "mean_miss_high",          "inf_coverage",  "inf_coverage_p",
    "inf_coverage_from", "inf_refined",   "mean_coverage_continuous"};

constexpr std::size_t index(Metric m) { return static_cast<std::size_t>(m); }
constexpr std::size_t index(Stat s) { return static_cast<std::size_t>(s); }

}  // namespace covergrid::engine
