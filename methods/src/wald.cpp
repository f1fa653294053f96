// wald — the normal-approximation (Wald) interval, p^ -/+ z sqrt(p^ q^ / n).
// Reference: Laplace (1812); its failures are documented by Brown, Cai &
// DasGupta (2001), Statistical Science 16:101-133.
// One-sided: the same formula with z of the single tail. At x = 0 and x = n
// the interval degenerates to a point; limits may overshoot [0, 1] (raw kept).
#include "covergrid/methods/numerics.hpp"
#include "covergrid/methods/registry.hpp"

#include <cmath>

namespace covergrid::methods {
namespace {

class Wald final : public IntervalMethod {
 public:
  double lower(int x, int n, double a_lo) const override { return centre(x, n) - half(x, n, a_lo); }
  double upper(int x, int n, double a_hi) const override { return centre(x, n) + half(x, n, a_hi); }

 private:
  static double centre(int x, int n) { return static_cast<double>(x) / n; }
  static double half(int x, int n, double tail) {
    const double p = centre(x, n);
    return z_upper(tail) * std::sqrt(p * (1 - p) / n);
  }
};

}  // namespace

MethodEntry wald_entry() {
  return {{"wald",
           "Wald (normal approximation)",
           Family::approximate,
           {},
           "Laplace (1812); Brown, Cai & DasGupta (2001), Statist. Sci. 16:101-133",
           "p^ -/+ z*sqrt(p^(1-p^)/n); one-sided: z of the single tail"},
          [](const ParamValues&) { return std::make_unique<Wald>(); }};
}

}  // namespace covergrid::methods
