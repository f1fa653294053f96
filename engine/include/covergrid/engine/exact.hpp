#pragma once
/// Exact evaluation through a sampling model: the metrics of every table at
/// one (n, p) in one pass over the model's probability window, the
/// continuous-p infimum of coverage, the measure of p below a threshold, and
/// the exact mean coverage over a p-range. The model defaults to the
/// binomial; nothing here depends on which model it is.
#include "covergrid/engine/binomial_window.hpp"
#include "covergrid/engine/sampling_model.hpp"
#include "covergrid/engine/coverage_rule.hpp"
#include "covergrid/engine/interval_table.hpp"
#include "covergrid/engine/metrics.hpp"

#include <array>
#include <cmath>
#include <cstddef>
#include <span>

namespace covergrid::engine {

using CellMetrics = std::array<double, metric_count>;

/// Every metric of `table` at true proportion p, from the model's window at (n, p).
/// Coverage uses the closed interval [L, U]. An unsupported table gives NaN.
/// For a table whose limits are non-decreasing in x (checked per table, never
/// assumed) the covered set is the run a..b found by binary search, and
/// coverage and misses come from the window's running sums; other tables are
/// scanned x by x (exact_metrics_scan). Width moments are one vectorisable
/// pass; degenerate and overshoot sum over the few x where they occur.
CellMetrics exact_metrics(const IntervalTable& table, const ProbabilityWindow& window, double p);

/// Where a monotone table's covered run starts and ends at the last p seen:
/// the first x with U_x >= p and the first x with L_x > p, over all x. A row
/// of cells walks it from one p to the next instead of searching afresh.
struct RunCursor {
  std::size_t first_up = 0;
  std::size_t past_low = 0;
};

/// exact_metrics for `count` tables at one (n, p), bit for bit (the tests hold
/// it to that): out[c] for tables[c]. The covered runs of monotone tables are
/// walked from cursors[c] (any order of p is right; ascending p within a row
/// costs about one step), and their width moments are accumulated for several
/// tables in one pass over the window, so the sums, each in the same order as
/// exact_metrics adds them, no longer wait on one another.
void exact_metrics_cell(const IntervalTable* const* tables, std::size_t count,
                        const ProbabilityWindow& window, double p, RunCursor* cursors, CellMetrics* out);

/// The same metrics by the plain scan over every x of the window, whatever
/// the table's shape; the tests hold exact_metrics to it.
CellMetrics exact_metrics_scan(const IntervalTable& table, const ProbabilityWindow& window, double p);

/// Exact coverage at p (snapped to the model's attainable p) by direct
/// summation over all x = 0..n (no window): the slow independent path the
/// tests compare against.
double coverage_by_enumeration(const IntervalTable& table, double p,
                               const SamplingModel& model = binomial_model());

struct InfimumResult {
  double value = 0;      // inf of coverage over [p_lo, p_hi]
  double where = 0;      // the p at which it is approached
  int from = 0;          // -1: approached from below `where`, +1: from above, 0: attained there
  bool refined = false;  // a non-contiguous covered set was met and searched densely
  bool stopped = false;  // the sweep stopped early at a value below stop_below
};

/// The exact infimum of coverage over the continuous range [p_lo, p_hi].
/// Between consecutive interval endpoints the covered set is fixed; for a
/// contiguous covered run a..b of a model with unimodal runs
/// (SamplingModel::unimodal_runs; the binomial's are), P(a <= X <= b) is
/// unimodal in p, so the minimum over a segment lies at its ends, as a
/// one-sided limit. The sweep keeps the covered set and its run boundaries up
/// to date at each endpoint, so each segment costs O(log n) plus two CDF
/// evaluations. Where a covered set is not contiguous, or the model's runs
/// are not known to be unimodal, the segment is searched at 33 points instead
/// (flagged as refined). Endpoints closer than 1e-12 (the precision of the
/// limits) are merged into one event, so rounding gaps do not count as dips.
/// With `stop_below` set, the sweep stops as soon as a coverage below it is
/// seen (the result is then a value below it, not the infimum; `stopped`).
///
/// Models on a lattice (SamplingModel::lattice() = L: a finite population's
/// K/N) attain only the points k/L, and for them the infimum is the minimum
/// over the points in [p_lo, p_hi], attained (`from` = 0): for a monotone
/// table and unimodal runs, over the first and last point between
/// consecutive endpoints (and the points on one), each summed over its
/// window; otherwise over every point (a regular subsample of 10^6 beyond
/// that many, flagged as refined). An empty range gives NaN.
///
/// The same models take the uniform mean (coverage_uniform_mean,
/// miss_uniform_means) as the average over the points in the range, and the
/// measure below a threshold as (p_hi - p_lo) times the share of points
/// below it; both cost one window per point.
InfimumResult coverage_infimum(const IntervalTable& table, double p_lo, double p_hi,
                               double stop_below = -HUGE_VAL, const SamplingModel& model = binomial_model());

/// Mean coverage over p uniform on [p_lo, p_hi], exactly, from the model's
/// closed-form mass of each x over a p-range (SamplingModel::uniform_mass;
/// binomial: the integral of P(X = x) over p is a Beta(x+1, n-x+1)
/// probability / (n+1), so mean = sum_x [I_b - I_a] / ((n+1)(p_hi - p_lo))
/// with [a, b] = [L_x, U_x] intersected with the range). At p_lo == p_hi it
/// is the coverage there. Throws std::logic_error for a model without a
/// closed form.
double coverage_uniform_mean(const IntervalTable& table, double p_lo, double p_hi,
                             const SamplingModel& model = binomial_model());

/// How much of [p_lo, p_hi] has coverage below `threshold`.
struct BelowMeasure {
  double measure = 0;        // Lebesgue measure of {p in [p_lo, p_hi] : coverage(p) < threshold}
  bool approximate = false;  // a non-contiguous covered set was met and sampled at 65 points
};

/// The exact measure of the p where coverage is below `threshold`. Between
/// consecutive interval endpoints (merged within 1e-12, as in
/// coverage_infimum) the covered run a..b is fixed and its coverage is
/// unimodal in p, so {coverage >= threshold} is one interval of the segment:
/// a segment whose two ends are at or above the threshold contributes
/// nothing; otherwise the crossings are found by TOMS 748 (and the segment's
/// maximum by Brent's method where both ends are below). Tables whose limits
/// are not monotone are scanned per segment and may be sampled (flagged), as
/// is every segment of a model whose runs are not known to be unimodal.
BelowMeasure coverage_measure_below(const IntervalTable& table, double p_lo, double p_hi, double threshold,
                                    const SamplingModel& model = binomial_model());

/// Mean over p uniform on [p_lo, p_hi] of P(U < p) (miss_low) and of
/// P(L > p) (miss_high), exactly, as for coverage_uniform_mean.
std::array<double, 2> miss_uniform_means(const IntervalTable& table, double p_lo, double p_hi,
                                         const SamplingModel& model = binomial_model());

/// Binomial coverage at p of a fixed contiguous run a..b: 1 - P(X < a) - P(X > b)
/// (the binomial model's run_probability).
double run_probability(int a, int b, int n, double p);

/// The integral of the binomial P(X = x) over p in [a, b], times n + 1:
/// I_b - I_a for Beta(x+1, n-x+1), taken on the smaller-tail side (the
/// binomial model's uniform_mass).
double beta_mass(int x, int n, double a, double b);

}  // namespace covergrid::engine
