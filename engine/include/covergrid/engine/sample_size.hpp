#pragma once
/// Sample-size planning (`covergrid plan`; README, "Planning a sample size"): the smallest n in a
/// search range at which a method meets every stated requirement over a
/// p-range, by the exact engine (binomial model), without writing a cube.
///
/// Coverage is not monotone in n, so a plan reports two answers: the first n
/// that meets the requirements, and the n from which every larger n of the
/// search range meets them.
///
/// Zero-width intervals: an interval with U - L <= zero_width_tolerance
/// claims certainty the data cannot give (Wald's [0, 0] at x = 0 covers no
/// p > 0), so an n at which any outcome x = 0..n gives one fails every width
/// and margin requirement, whatever the other outcomes give.
#include "covergrid/engine/estimate.hpp"
#include "covergrid/engine/interval_table.hpp"
#include "covergrid/engine/scenario.hpp"

#include <cstddef>
#include <functional>
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
  std::shared_ptr<const SamplingModel> model = binomial_model_ptr();  // the sampling model planned under
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
  int zero_width_x = -1;                  // the first x with a zero-width interval, -1 if none
  int zero_width_count = 0;               // how many x = 0..n have one
};

/// Widths at or below this count as zero: limits are computed to about
/// 1e-12 in p, so a narrower interval is a point in all but rounding.
inline constexpr double zero_width_tolerance = 1e-12;

/// How far below nominal the exact infimum of coverage over the p-range may
/// fall before a plan's answer is marked: a fifth of alpha = 1 - level
/// (0.01 at 95 %, 0.002 at 99 %), the band the report draws as "near
/// nominal".
double coverage_warning_depth(double level);

/// True when the infimum at f is below nominal - coverage_warning_depth (by
/// meets_coverage, the shared rule).
bool coverage_far_below(const PlanFigures& f, double level);

struct PlanResult {
  bool found = false;         // some n of the range meets the requirements
  PlanFigures first;          // the first n that does
  bool stable_found = false;  // the largest n of the range meets them, so a stable n exists
  PlanFigures stable;         // the n from which every larger n up to n_to does
  std::size_t evaluated = 0;  // n evaluated (the search skips the middle)
  PlanFigures at_end;         // the figures at n_to when no n meets (to say why), else unset
};

/// Where the search is, for a progress display: reported from the calling
/// thread after each block of n.
struct PlanProgress {
  bool downward = true;       // scanning down from n_to (else up from n_from)
  int n = 0;                  // the last n decided
  std::size_t evaluated = 0;  // n decided so far
};
using PlanProgressFn = std::function<void(const PlanProgress&)>;

/// The margin of error of one interval: half its width for a two-sided
/// interval, the distance from the estimate x/n to the finite limit for a
/// one-sided bound (clipped limits).
double margin_of_error(double lower, double upper, int x, int n, Side side);

/// The largest expected width over [p_lo, p_hi]: a 129-point grid, then
/// Brent's method between the neighbours of the largest grid point.
std::pair<double, double> max_expected_width(const IntervalTable& table, double p_lo, double p_hi,
                                             const SamplingModel& model = binomial_model());

/// All figures at n.
PlanFigures plan_figures(const PlanRequest& request, int n);

/// The largest margin over x = 0..n without the table, where a closed form
/// proves where it is: for wald-half (any side) and wilson (two-sided) the
/// margin is largest at the x nearest n/2 when that interval is not clipped
/// (the raw half-width is constant, or increasing in p^(1 - p^), and clipping
/// only shortens), and neither ever gives a zero-width interval. Returns a
/// negative value where no closed form applies.
double closed_form_max_margin(const PlanRequest& request, int n);

/// True when every requirement is a coverage one (minimum or mean) at or
/// below the level and the method is clopper-pearson, whose coverage is at
/// least its level at every n and p on every side (Clopper & Pearson 1934):
/// every n meets them, with nothing to compute.
bool coverage_guaranteed(const PlanRequest& request);

/// Whether n meets every requirement (stops early at the first one failed;
/// cheap proofs first: zero width at x = 0 or n and the margin at the middle
/// x reject without the table, closed_form_max_margin decides a margin-only
/// requirement without it, coverage_guaranteed needs nothing).
bool plan_meets(const PlanRequest& request, int n);

/// What the search costs at most: every n of the range decided
/// (estimate_per_n over plan_meets; the search usually decides far fewer).
WorkEstimate estimate_plan(const PlanRequest& request, int threads = 0);

/// The search. `threads` = 0 uses every core. Each n is decided on its own,
/// so the result does not depend on the thread count.
PlanResult plan_sample_size(const PlanRequest& request, int threads = 0, const PlanProgressFn& progress = {});

}  // namespace covergrid::engine
