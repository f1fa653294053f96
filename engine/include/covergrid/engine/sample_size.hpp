#pragma once
/// Sample-size planning (design section 9, `plan`): the smallest n in a
/// search range at which a method meets every stated requirement over a
/// p-range, by the exact engine (binomial model), without writing a cube.
///
/// Coverage is not monotone in n, so a plan reports two answers: the first n
/// that meets the requirements, and the n from which every larger n of the
/// search range meets them.
#include "covergrid/engine/interval_table.hpp"
#include "covergrid/engine/scenario.hpp"

#include <vector>

namespace covergrid::engine {

enum class Requirement {
  min_coverage,   // exact infimum of coverage over the p-range >= value
  mean_coverage,  // exact mean coverage over p uniform on the range >= value
  max_width,      // expected width <= value at every p of the range
  max_margin,     // largest margin of error over every outcome x = 0..n <= value
};

const char* requirement_name(Requirement r);

struct PlanRequest {
  methods::MethodInstance method;
  double level = 0.95;
  Side side = Side::two_sided;
  double p_lo = 0, p_hi = 1;
  int n_from = 1, n_to = 5000;
  std::vector<std::pair<Requirement, double>> requirements;  // all must hold
};

/// Every figure of one n.
struct PlanFigures {
  int n = 0;
  double inf_coverage = 0, inf_coverage_p = 0;
  double mean_coverage = 0;
  double max_width = 0, max_width_p = 0;  // the largest expected width over the range, and where
  double max_margin = 0;                  // the largest margin over x = 0..n
};

struct PlanResult {
  bool found = false;         // some n of the range meets the requirements
  PlanFigures first;          // the first n that does
  bool stable_found = false;  // the largest n of the range meets them, so a stable n exists
  PlanFigures stable;         // the n from which every larger n up to n_to does
  std::size_t evaluated = 0;  // n evaluated (the search skips the middle)
};

/// The margin of error of one interval: half its width for a two-sided
/// interval, the distance from the estimate x/n to the finite limit for a
/// one-sided bound (clipped limits).
double margin_of_error(double lower, double upper, int x, int n, Side side);

/// The largest expected width over [p_lo, p_hi]: a 129-point grid, then
/// Brent's method between the neighbours of the largest grid point.
std::pair<double, double> max_expected_width(const IntervalTable& table, double p_lo, double p_hi);

/// All figures at n.
PlanFigures plan_figures(const PlanRequest& request, int n);

/// Whether n meets every requirement (stops early at the first one failed).
bool plan_meets(const PlanRequest& request, int n);

/// The search. `threads` = 0 uses every core.
PlanResult plan_sample_size(const PlanRequest& request, int threads = 0);

}  // namespace covergrid::engine
