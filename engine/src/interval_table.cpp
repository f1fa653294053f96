// Builds the interval table of one (method, n, level, side): every x's
// limits, widths and the flags the metrics read.
#include "covergrid/engine/interval_table.hpp"

#include <fmt/format.h>

#include <exception>
#include <string>

namespace covergrid::engine {

methods::Limits named_interval(const methods::IntervalMethod& method, int x, int n, double level,
                               methods::Side side, std::string_view label) {
  try {
    return methods::interval(method, x, n, level, side);
  } catch (const methods::ParameterError&) {
    throw;
  } catch (const std::exception& e) {
    // Boost.Math and the root finders throw std::exceptions that say
    // nothing of the input: name it so that a failing run can be redone.
    throw methods::NumericalError(
        fmt::format("{}numerical failure at x = {}, n = {}, level = {}, side = {}: {}",
                    label.empty() ? std::string() : fmt::format("method '{}': ", label), x, n, level,
                    methods::side_name(side), e.what()));
  }
}

methods::Limits named_clustered_interval(const IntervalTable& table, int x, const methods::ClusterCounts& c) {
  try {
    return methods::clustered_interval(*table.clustered, x, c, table.level, table.side);
  } catch (const methods::ParameterError&) {
    throw;
  } catch (const std::exception& e) {
    throw methods::NumericalError(
        fmt::format("{}numerical failure at x = {}, n = {} in {} clusters (sum of squared cluster counts "
                    "{}), level = {}, "
                    "side = {}: {}",
                    table.label.empty() ? std::string() : fmt::format("method '{}': ", table.label), x,
                    c.clusters * c.cluster_size, c.clusters, c.sum_squares, table.level,
                    methods::side_name(table.side), e.what()));
  }
}

namespace {

IntervalTable build(const std::shared_ptr<const methods::IntervalMethod>& bound,
                    const methods::IntervalMethod& method, int n, double level, methods::Side side,
                    bool mirror, std::string_view label) {
  IntervalTable t;
  t.n = n;
  if (!method.supports(side)) {
    t.supported = false;
    return t;
  }
  if (method.needs_clusters()) {
    t.supported = false;
    t.clustered = bound;
    t.level = level;
    t.side = side;
    t.label = std::string(label);
    return t;
  }
  const std::size_t size = static_cast<std::size_t>(n) + 1;
  t.lower.resize(size);
  t.upper.resize(size);
  t.width.resize(size);
  t.degenerate.resize(size);
  t.overshoot.resize(size);
  t.monotone = true;
  for (int x = 0; x <= n; ++x) {
    const std::size_t i = static_cast<std::size_t>(x);
    if (mirror && x > n / 2) {
      const std::size_t j = static_cast<std::size_t>(n - x);  // already computed
      t.lower[i] = 1.0 - t.upper[j];
      t.upper[i] = 1.0 - t.lower[j];
      t.overshoot[i] = t.overshoot[j];
    } else {
      const methods::Limits lim = named_interval(method, x, n, level, side, label);
      t.lower[i] = lim.lower;
      t.upper[i] = lim.upper;
      t.overshoot[i] = (lim.raw_lower < 0.0 || lim.raw_upper > 1.0) ? 1.0 : 0.0;
    }
    t.width[i] = t.upper[i] - t.lower[i];
    t.degenerate[i] = t.upper[i] == t.lower[i] ? 1.0 : 0.0;
    if (t.degenerate[i] != 0.0) t.degenerate_x.push_back(x);
    if (t.overshoot[i] != 0.0) t.overshoot_x.push_back(x);
    if (x > 0 && (t.lower[i] < t.lower[i - 1] || t.upper[i] < t.upper[i - 1])) t.monotone = false;
  }
  return t;
}

}  // namespace

IntervalTable build_table(const methods::IntervalMethod& method, int n, double level, methods::Side side,
                          std::string_view label, const methods::Design& design) {
  const auto bound = method.for_design(design);
  return build(bound, bound ? *bound : method, n, level, side, false, label);
}

IntervalTable build_table_mirrored(const methods::IntervalMethod& method, int n, double level,
                                   methods::Side side, std::string_view label,
                                   const methods::Design& design) {
  const auto bound = method.for_design(design);
  const methods::IntervalMethod& m = bound ? *bound : method;
  return build(bound, m, n, level, side, side == methods::Side::two_sided && m.symmetric(), label);
}

}  // namespace covergrid::engine
