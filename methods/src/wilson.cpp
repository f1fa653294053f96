// wilson — the score interval of Wilson (1927), J. Amer. Statist. Assoc.
// 22:209-212: (x + z^2/2)/(n + z^2) -/+ z sqrt(n)/(n + z^2) sqrt(p^ q^ + z^2/(4n)).
// One-sided: the same expression with z of the single tail (the inversion of
// the one-sided score test). Limits always lie in [0, 1].
#include "covergrid/methods/numerics.hpp"
#include "covergrid/methods/registry.hpp"
#include "shared_limits.hpp"

#include <cmath>

namespace covergrid::methods {

double wilson_limit(double x, double n, double z, int sign) {
  const double nn = n;
  const double p = x / nn;
  const double z2 = z * z;
  const double centre = (x + z2 / 2) / (nn + z2);
  const double half = z * std::sqrt(nn) / (nn + z2) * std::sqrt(p * (1 - p) + z2 / (4 * nn));
  // At x = 0 (x = n) the lower (upper) limit is exactly 0 (1) in exact
  // arithmetic; return it exactly instead of a rounding residue.
  if (sign < 0 && x == 0 && z >= 0) return 0.0;
  if (sign > 0 && x == n && z >= 0) return 1.0;
  return centre + sign * half;
}

namespace {

class Wilson final : public IntervalMethod {
 public:
  double lower(int x, int n, double a_lo) const override { return wilson_limit(x, n, z_upper(a_lo), -1); }
  double upper(int x, int n, double a_hi) const override { return wilson_limit(x, n, z_upper(a_hi), +1); }
};

}  // namespace

MethodEntry wilson_entry() {
  return {{"wilson",
           "Wilson score",
           Family::approximate,
           {},
           "Wilson (1927), J. Amer. Statist. Assoc. 22:209-212",
           "(x+z^2/2)/(n+z^2) -/+ z*sqrt(n)/(n+z^2)*sqrt(p^q^+z^2/(4n)); one-sided: z of the tail"},
          [](const ParamValues&) { return std::make_unique<Wilson>(); }};
}

}  // namespace covergrid::methods
