#pragma once
/// Exact evaluation for the binomial model: the metrics of every table at one
/// (n, p) in one pass over the pmf window, the continuous-p infimum of
/// coverage, and the exact mean coverage over a p-range.
#include "covergrid/engine/binomial_window.hpp"
#include "covergrid/engine/interval_table.hpp"
#include "covergrid/engine/metrics.hpp"

#include <array>
#include <span>

namespace covergrid::engine {

using CellMetrics = std::array<double, metric_count>;

/// Every metric of `table` at true proportion p, from the window of Bin(n, p).
/// Coverage uses the closed interval [L, U]. An unsupported table gives NaN.
/// For a table whose limits are non-decreasing in x (checked per table, never
/// assumed) the covered set is the run a..b found by binary search, and
/// coverage and misses come from the window's running sums; other tables are
/// scanned x by x (exact_metrics_scan). Width moments are one vectorisable
/// pass; degenerate and overshoot sum over the few x where they occur.
CellMetrics exact_metrics(const IntervalTable& table, const BinomialWindow& window, double p);

/// The same metrics by the plain scan over every x of the window, whatever
/// the table's shape; the tests hold exact_metrics to it.
CellMetrics exact_metrics_scan(const IntervalTable& table, const BinomialWindow& window, double p);

/// Exact coverage at p by direct summation over all x = 0..n (no window):
/// the slow independent path the tests compare against.
double coverage_by_enumeration(const IntervalTable& table, double p);

struct InfimumResult {
  double value = 0;      // inf of coverage over [p_lo, p_hi]
  double where = 0;      // the p at which it is approached
  int from = 0;          // -1: approached from below `where`, +1: from above, 0: attained there
  bool refined = false;  // a non-contiguous covered set was met and searched densely
};

/// The exact infimum of coverage over the continuous range [p_lo, p_hi].
/// Between consecutive interval endpoints the covered set is fixed; for a
/// contiguous covered run a..b, P(a <= X <= b) is unimodal in p, so the
/// minimum over a segment lies at its ends, as a one-sided limit. The sweep
/// keeps the covered set and its run boundaries up to date at each endpoint,
/// so each segment costs O(log n) plus two CDF evaluations. Where a covered
/// set is not contiguous, the segment is searched at 33 points instead
/// (flagged as refined). Endpoints closer than 1e-12 (the precision of the
/// limits) are merged into one event, so rounding gaps do not count as dips.
InfimumResult coverage_infimum(const IntervalTable& table, double p_lo, double p_hi);

/// Mean coverage over p uniform on [p_lo, p_hi], exactly: the integral of
/// P(X = x) over p is a Beta(x+1, n-x+1) probability / (n+1), so
/// mean = sum_x [I_b(x+1, n-x+1) - I_a(x+1, n-x+1)] / ((n+1)(p_hi - p_lo)) with
/// [a, b] = [L_x, U_x] intersected with the range. At p_lo == p_hi it is the
/// coverage there.
double coverage_uniform_mean(const IntervalTable& table, double p_lo, double p_hi);

/// Coverage at p of a fixed contiguous run a..b: 1 - P(X < a) - P(X > b).
double run_probability(int a, int b, int n, double p);

}  // namespace covergrid::engine
