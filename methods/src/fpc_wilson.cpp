// fpc-wilson — the Wilson score interval with the finite-population
// correction: the inversion of |p^ - p| <= z sqrt(p (1 - p) / n * f) with
// f = (N - n) / (N - 1), which is Wilson's interval with z^2 replaced by
// z^2 f. The score form of the correction in Cochran (1977), Sampling
// Techniques, 3rd ed., Wiley, sec. 3.3, inverted as Wilson (1927) inverts
// the binomial score test.
// N comes from the sampling model; an infinite population (f = 1) gives
// Wilson's interval, a census (f = 0) the point p^. Limits lie in [0, 1].
// One-sided: the same expression with z of the single tail.
#include "covergrid/methods/numerics.hpp"
#include "covergrid/methods/registry.hpp"
#include "shared_limits.hpp"

#include <cmath>

namespace covergrid::methods {

namespace {

class FpcWilson final : public IntervalMethod {
 public:
  explicit FpcWilson(double population) : population_(population) {}
  double lower(int x, int n, double a_lo) const override { return wilson_limit(x, n, z(n, a_lo), -1); }
  double upper(int x, int n, double a_hi) const override { return wilson_limit(x, n, z(n, a_hi), +1); }
  std::shared_ptr<const IntervalMethod> for_design(const Design& design) const override {
    return std::make_shared<FpcWilson>(design.population);
  }

 private:
  double z(int n, double tail) const {
    return z_upper(tail) * std::sqrt(finite_population_correction(n, population_));
  }
  double population_;
};

}  // namespace

MethodEntry fpc_wilson_entry() {
  return {
      {"fpc-wilson",
       "Wilson score, finite-population corrected",
       Family::approximate,
       {},
       "Wilson (1927), J. Amer. Statist. Assoc. 22:209-212; Cochran (1977), Sampling Techniques, sec. 3.3",
       "Wilson with z^2 replaced by z^2*(N-n)/(N-1), N from the sampling model (infinite: Wilson); "
       "one-sided: z of the tail"},
      [](const ParamValues&) { return std::make_unique<FpcWilson>(0.0); }};
}

}  // namespace covergrid::methods
