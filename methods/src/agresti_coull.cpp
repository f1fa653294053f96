// agresti-coull — the "add z^2/2 successes and failures" interval:
// n~ = n + z^2, p~ = (x + z^2/2)/n~, p~ -/+ z sqrt(p~(1 - p~)/n~).
// Reference: Agresti & Coull (1998), Amer. Statist. 52:119-126; in the
// general-z form of Brown, Cai & DasGupta (2001), Statist. Sci. 16:101-133.
// One-sided: z of the single tail, in both n~ and p~. Limits may overshoot.
#include "covergrid/methods/numerics.hpp"
#include "covergrid/methods/registry.hpp"

#include <cmath>

namespace covergrid::methods {
namespace {

class AgrestiCoull final : public IntervalMethod {
 public:
  double lower(int x, int n, double a_lo) const override { return limit(x, n, z_upper(a_lo), -1); }
  double upper(int x, int n, double a_hi) const override { return limit(x, n, z_upper(a_hi), +1); }

 private:
  static double limit(int x, int n, double z, int sign) {
    const double nt = n + z * z;
    const double pt = (x + z * z / 2) / nt;
    return pt + sign * z * std::sqrt(pt * (1 - pt) / nt);
  }
};

}  // namespace

MethodEntry agresti_coull_entry() {
  return {{"agresti-coull",
           "Agresti-Coull",
           Family::approximate,
           {},
           "Agresti & Coull (1998), Amer. Statist. 52:119-126; Brown, Cai & DasGupta (2001)",
           "n~=n+z^2, p~=(x+z^2/2)/n~, p~ -/+ z*sqrt(p~(1-p~)/n~); one-sided: z of the tail"},
          [](const ParamValues&) { return std::make_unique<AgrestiCoull>(); }};
}

}  // namespace covergrid::methods
