#pragma once
/// An interval table: one method's clipped limits for x = 0..n at one
/// (level, side), with the per-x quantities the metrics need. Built once per
/// (method, level, side, n) and shared by every p and every replicate
/// (design principle 2).
#include "covergrid/methods/interval.hpp"

#include <memory>
#include <string>
#include <string_view>
#include <vector>

namespace covergrid::engine {

struct IntervalTable {
  int n = 0;
  bool supported = true;      // false: the method does not define this side
  std::vector<double> lower;  // clipped, size n + 1
  std::vector<double> upper;
  std::vector<double> width;       // upper - lower
  std::vector<double> degenerate;  // 1.0 where upper == lower, else 0.0
  std::vector<double> overshoot;   // 1.0 where raw lower < 0 or raw upper > 1
  std::vector<int> degenerate_x;   // the x where degenerate is 1 (usually few)
  std::vector<int> overshoot_x;    // the x where overshoot is 1
  bool monotone = false;           // lower and upper both non-decreasing in x
  /// Set for a method that needs the cluster counts under the model's design
  /// (methods::IntervalMethod::needs_clusters): x alone gives no limits, so
  /// the table has none and `supported` is false for the exact engine (its
  /// cells are NaN); Monte Carlo computes this method's limits for each drawn
  /// sample (engine/src/monte_carlo.cpp) at `level` and `side`.
  std::shared_ptr<const methods::IntervalMethod> clustered;
  double level = 0;
  methods::Side side = methods::Side::two_sided;
  std::string label;
};

/// methods::clustered_interval with a failure named as named_interval does,
/// the sum of squared cluster counts included.
methods::Limits named_clustered_interval(const IntervalTable& table, int x, const methods::ClusterCounts& c);

/// methods::interval, with a numerical failure turned into a
/// methods::NumericalError naming x, n, level, side and (when given) the
/// method's label.
methods::Limits named_interval(const methods::IntervalMethod& method, int x, int n, double level,
                               methods::Side side, std::string_view label = {});

/// Builds the table; a method that does not support `side` gives an
/// unsupported table (its metrics are NaN). A limit that cannot be computed
/// throws methods::NumericalError naming x, n, level and side, and the
/// method's `label` when one is given, so that every command's one-line
/// message says what to avoid.
///
/// `design` is the sampling model's (SamplingModel::design()): a method that
/// uses it (methods::IntervalMethod::for_design) is bound to it first; the
/// default is an infinite population of independent draws.
IntervalTable build_table(const methods::IntervalMethod& method, int n, double level, methods::Side side,
                          std::string_view label = {}, const methods::Design& design = {});

/// The same table from half the work for a method that declares x <-> n - x
/// symmetry, two-sided: limits for x <= n/2 computed, the rest mirrored
/// (L_{n-x} = 1 - U_x), so values may differ from build_table() by rounding.
/// Other methods and sides fall back to build_table(). Used by searches
/// (plan) that decide, never by the cube.
IntervalTable build_table_mirrored(const methods::IntervalMethod& method, int n, double level,
                                   methods::Side side, std::string_view label = {},
                                   const methods::Design& design = {});

}  // namespace covergrid::engine
