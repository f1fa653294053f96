// arcsine — the variance-stabilised interval sin^2(asin(sqrt(p~)) -/+ z/(2 sqrt n))
// with Anscombe's p~ = (x + 3/8)/(n + 3/4) (Anscombe 1948, Biometrika
// 35:246-254; Brown, Cai & DasGupta 2001, Statist. Sci. 16:101-133).
// One-sided: z of the single tail. The angle is clipped to [0, pi/2] for the
// limits; so that overshoot can be measured, an angle theta < 0 is reported as
// the raw limit -sin^2(theta) and an angle theta > pi/2 as 2 - sin^2(theta)
// (both continuous at the boundary and outside [0, 1] exactly when the angle
// leaves [0, pi/2]).
#include "covergrid/methods/numerics.hpp"
#include "covergrid/methods/registry.hpp"

#include <cmath>
#include <numbers>

namespace covergrid::methods {
namespace {

double raw_from_angle(double theta) {
  const double s = std::sin(theta);
  if (theta < 0) return -s * s;
  if (theta > std::numbers::pi / 2) return 2.0 - s * s;
  return s * s;
}

class Arcsine final : public IntervalMethod {
 public:
  double lower(int x, int n, double a_lo) const override {
    return raw_from_angle(angle(x, n) - z_upper(a_lo) / (2 * std::sqrt(static_cast<double>(n))));
  }
  double upper(int x, int n, double a_hi) const override {
    return raw_from_angle(angle(x, n) + z_upper(a_hi) / (2 * std::sqrt(static_cast<double>(n))));
  }

 private:
  static double angle(int x, int n) { return std::asin(std::sqrt((x + 0.375) / (n + 0.75))); }
};

}  // namespace

MethodEntry arcsine_entry() {
  return {{"arcsine",
           "Arcsine (Anscombe)",
           Family::approximate,
           {},
           "Anscombe (1948), Biometrika 35:246-254; Brown, Cai & DasGupta (2001)",
           "sin^2(asin(sqrt(p~)) -/+ z/(2 sqrt n)), p~=(x+3/8)/(n+3/4); one-sided: z of the tail"},
          [](const ParamValues&) { return std::make_unique<Arcsine>(); }};
}

}  // namespace covergrid::methods
