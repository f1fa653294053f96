#pragma once
/// Method comparison from a cube (`covergrid rank`): per (model, side, level)
/// and n band, methods ordered by a stated criterion, with paired Monte Carlo
/// differences where the cube holds only simulated results.
#include "covergrid/output/cube.hpp"

#include <string>
#include <utility>
#include <vector>

namespace covergrid::output {

enum class RankCriterion {
  shortest,  // shortest mean width among methods whose worst coverage >= nominal - tolerance
  closest,   // smallest mean RMS deviation of coverage from nominal
  safest,    // largest worst-case coverage
};

const char* criterion_name(RankCriterion c);

/// What the ordering looks at for one method in one group.
struct RankStanding {
  bool eligible = true;       // worst coverage meets nominal - tolerance (engine::meets_coverage)
  double worst_coverage = 0;  // exact infimum (or simulated grid minimum), worst over the n considered
  double mean_width = 0;
  double rms_deviation = 0;
};

/// The one ordering every table uses (`rank`, the run/inspect headline, the
/// summary tables, the report): true when `a` ranks before `b` under `c`.
/// shortest: eligible methods first, by mean width; the others after them,
/// by worst coverage (largest first). closest: by RMS deviation. safest: by
/// worst coverage, largest first.
bool ranks_before(RankCriterion c, const RankStanding& a, const RankStanding& b);
/// One sentence stating the criterion, for tables and reports.
std::string criterion_text(RankCriterion c, double tolerance, bool simulated);

struct RankOptions {
  RankCriterion criterion = RankCriterion::shortest;
  double tolerance = 0;
  /// Inclusive n bands; empty = up to three bands with equal numbers of the cube's n values.
  std::vector<std::pair<std::int64_t, std::int64_t>> bands;
  bool paired = true;  // paired differences for simulated-only cubes
};

struct RankEntry {
  std::size_t method = 0;
  int rank = 0;
  bool eligible = true;  // worst coverage >= nominal - tolerance
  double worst_coverage =
      0;  // exact: min over the band's n of the continuous infimum; simulated: grid minimum
  std::int64_t worst_n = 0;
  double mean_width = 0, mean_coverage = 0, rms_deviation = 0;  // means over the band's n
  /// Ranked on simulated figures in a cube with exact ones (no exact cells:
  /// a method that needs the cluster counts); such entries follow the rest.
  bool simulated = false;
  bool has_pair = false;  // paired difference of coverage against the group's first method
  double pair_difference = 0, pair_se = 0;
};

struct RankGroup {
  std::size_t model = 0, side = 0, level = 0;
  std::int64_t n_lo = 0, n_hi = 0;
  std::size_t n_count = 0;
  bool simulated = false;
  std::vector<RankEntry> entries;
};

/// Throws InputError for an incomplete cube or a band holding none of its n.
std::vector<RankGroup> rank_methods(const CubeReader& cube, const RankOptions& options);
std::string rank_text(const CubeReader& cube, const std::vector<RankGroup>& groups,
                      const RankOptions& options);
std::string rank_csv(const CubeReader& cube, const std::vector<RankGroup>& groups);

}  // namespace covergrid::output
