#pragma once
/// The numerical limits of the inputs every method is guaranteed to compute
/// (documented in README.md, "Numerical limits"); the command line and the
/// scenario loader refuse values outside them up front (exit 2).
///
/// Levels: below 1e-6 the tail probability 1 - level rounds towards 1 and
/// the normal quantile overflows (level 5e-324 made erfc_inv overflow);
/// above 1 - 1e-12 alpha / 2 is within a few thousand ulps of the solvers'
/// tolerances. Both ends lie far beyond any level a study reports.
/// Probabilities p below the smallest normal double (2.2e-308) are computed
/// as they are (Bin(n, p) then puts all its mass at 0, as p = 0 does).
namespace covergrid::methods {

inline constexpr double min_level = 1e-6;
inline constexpr double max_level = 1 - 1e-12;
/// "[1e-06, 0.999999999999]" for messages.
inline constexpr const char* level_range_text = "[1e-06, 0.999999999999]";

/// Whether `level` lies in [min_level, max_level] (false for NaN).
inline bool level_in_range(double level) { return level >= min_level && level <= max_level; }

}  // namespace covergrid::methods
