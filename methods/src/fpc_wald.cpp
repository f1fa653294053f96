// fpc-wald — the Wald interval with the finite-population correction, for a
// sample of n drawn without replacement from a population of N:
// p^ -/+ z sqrt(p^ q^ / n * (N - n) / (N - 1)). Reference: Cochran (1977),
// Sampling Techniques, 3rd ed., Wiley, section 3.3 (the variance of a
// proportion under simple random sampling without replacement).
// The population comes from the sampling model the method is evaluated
// under; under an infinite population (the binomial model) the correction is
// 1 and the method is Wald's. A census (n = N) gives the point p^.
// One-sided: the same formula with z of the single tail.
#include "covergrid/methods/numerics.hpp"
#include "covergrid/methods/registry.hpp"
#include "shared_limits.hpp"

#include <cmath>

namespace covergrid::methods {

double finite_population_correction(int n, double population) {
  if (population <= 0) return 1.0;
  if (population <= 1) return 0.0;
  return std::max(0.0, (population - n) / (population - 1));
}

namespace {

class FpcWald final : public IntervalMethod {
 public:
  explicit FpcWald(double population) : population_(population) {}
  double lower(int x, int n, double a_lo) const override { return centre(x, n) - half(x, n, a_lo); }
  double upper(int x, int n, double a_hi) const override { return centre(x, n) + half(x, n, a_hi); }
  std::shared_ptr<const IntervalMethod> for_design(const Design& design) const override {
    return std::make_shared<FpcWald>(design.population);
  }

 private:
  static double centre(int x, int n) { return static_cast<double>(x) / n; }
  double half(int x, int n, double tail) const {
    const double p = centre(x, n);
    return z_upper(tail) * std::sqrt(p * (1 - p) / n * finite_population_correction(n, population_));
  }
  double population_;
};

}  // namespace

MethodEntry fpc_wald_entry() {
  return {{"fpc-wald",
           "Wald, finite-population corrected",
           Family::approximate,
           {},
           "Cochran (1977), Sampling Techniques, 3rd ed., Wiley, sec. 3.3",
           "p^ -/+ z*sqrt(p^(1-p^)/n*(N-n)/(N-1)), N from the sampling model (infinite: Wald); "
           "one-sided: z of the single tail"},
          [](const ParamValues&) { return std::make_unique<FpcWald>(0.0); }};
}

}  // namespace covergrid::methods
