#include "covergrid/methods/interval.hpp"

#include <algorithm>

namespace covergrid::methods {

std::string_view side_name(Side side) {
  switch (side) {
    case Side::two_sided:
      return "two-sided";
    case Side::lower_bound:
      return "lower-bound";
    case Side::upper_bound:
      return "upper-bound";
  }
  return "?";
}

bool parse_side(std::string_view name, Side& side) {
  for (Side s : {Side::two_sided, Side::lower_bound, Side::upper_bound})
    if (side_name(s) == name) {
      side = s;
      return true;
    }
  return false;
}

std::string_view family_name(Family family) {
  switch (family) {
    case Family::approximate:
      return "approximate";
    case Family::exact_tail:
      return "exact-tail";
    case Family::bayesian:
      return "Bayesian";
    case Family::likelihood:
      return "likelihood";
    case Family::user_table:
      return "user table";
  }
  return "?";
}

std::shared_ptr<const IntervalMethod> under_design(const std::shared_ptr<const IntervalMethod>& method,
                                                   const Design& design) {
  auto bound = method->for_design(design);
  return bound ? bound : method;
}

Limits interval(const IntervalMethod& method, int x, int n, double level, Side side) {
  const double alpha = 1.0 - level;
  RawLimits raw{0.0, 1.0};
  switch (side) {
    case Side::two_sided:
      raw = method.two_sided(x, n, alpha);
      break;
    case Side::lower_bound:
      raw = {method.lower(x, n, alpha), 1.0};
      break;
    case Side::upper_bound:
      raw = {0.0, method.upper(x, n, alpha)};
      break;
  }
  Limits out{std::clamp(raw.lower, 0.0, 1.0), std::clamp(raw.upper, 0.0, 1.0), raw.lower, raw.upper};
  return out;
}

Limits clustered_interval(const IntervalMethod& method, int x, const ClusterCounts& c, double level,
                          Side side) {
  const double alpha = 1.0 - level;
  RawLimits raw{0.0, 1.0};
  switch (side) {
    case Side::two_sided:
      raw = {method.cluster_lower(x, c, alpha / 2), method.cluster_upper(x, c, alpha / 2)};
      break;
    case Side::lower_bound:
      raw = {method.cluster_lower(x, c, alpha), 1.0};
      break;
    case Side::upper_bound:
      raw = {0.0, method.cluster_upper(x, c, alpha)};
      break;
  }
  return {std::clamp(raw.lower, 0.0, 1.0), std::clamp(raw.upper, 0.0, 1.0), raw.lower, raw.upper};
}

}  // namespace covergrid::methods
