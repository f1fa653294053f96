#pragma once
/// The one rule by which every command (audit, plan, rank, the run/inspect
/// headline and the report) judges a coverage figure against a threshold
/// such as nominal or nominal - tolerance.
#include <cstdio>
#include <string>

namespace covergrid::engine {

/// A coverage figure within this much below a threshold counts as meeting
/// it: limits are solved to ~1e-15 in p and coverage sums carry rounding of a
/// few 1e-15, so methods whose infimum equals nominal in theory (one-sided
/// Clopper-Pearson, Blaker) come out at nominal - 2e-15 or
/// 0.89999999999999969 at 90 %; 1e-10 is far above that noise and far below
/// any tolerance a claim states.
inline constexpr double coverage_decision_slack = 1e-10;

/// True when `coverage` meets `threshold` under the shared slack. NaN never
/// meets anything.
inline bool meets_coverage(double coverage, double threshold) {
  return coverage >= threshold - coverage_decision_slack;
}

/// "nominal" when tolerance is 0, else "nominal - 0.01" (shortest %g form):
/// the words every table header uses for the threshold.
inline std::string threshold_words(double tolerance) {
  if (!(tolerance > 0)) return "nominal";
  char buf[64];
  std::snprintf(buf, sizeof buf, "nominal - %g", tolerance);
  return buf;
}

}  // namespace covergrid::engine
