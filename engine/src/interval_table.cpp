#include "covergrid/engine/interval_table.hpp"

namespace covergrid::engine {

IntervalTable build_table(const methods::IntervalMethod& method, int n, double level, methods::Side side) {
  IntervalTable t;
  t.n = n;
  if (!method.supports(side)) {
    t.supported = false;
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
    const auto lim = methods::interval(method, x, n, level, side);
    const std::size_t i = static_cast<std::size_t>(x);
    t.lower[i] = lim.lower;
    t.upper[i] = lim.upper;
    t.width[i] = lim.upper - lim.lower;
    t.degenerate[i] = lim.upper == lim.lower ? 1.0 : 0.0;
    t.overshoot[i] = (lim.raw_lower < 0.0 || lim.raw_upper > 1.0) ? 1.0 : 0.0;
    if (t.degenerate[i] != 0.0) t.degenerate_x.push_back(x);
    if (t.overshoot[i] != 0.0) t.overshoot_x.push_back(x);
    if (x > 0 && (t.lower[i] < t.lower[i - 1] || t.upper[i] < t.upper[i - 1])) t.monotone = false;
  }
  return t;
}

}  // namespace covergrid::engine
