// exact-hypergeometric — the exact interval for the number of successes K in
// a finite population of N, from inverting the hypergeometric tail tests,
// reported as K/N:
//   K_L = min{K : P_K(X >= x) >= a_lo},  K_U = max{K : P_K(X <= x) >= a_hi},
// with X hypergeometric (N, K, n). Reference: Buonaccorsi (1987), "A note on
// confidence intervals for proportions in finite populations", The American
// Statistician 41:215-218 (citation from memory); the construction is the
// Clopper-Pearson one with the hypergeometric law.
// Guarantee: P_K(X >= x) rises with K (adding a success to the population
// can only raise the count drawn), so K < K_L(X) happens only when
// P_K(X >= X) < a_lo, which has probability at most a_lo; likewise above.
// Each one-sided bound, and the two-sided interval, covers every K with
// probability at least nominal. Limits are K/N exactly (the same double as
// the model's attainable p). x = 0 gives K_L = 0, x = n gives K_U = N.
// N comes from the sampling model; under an infinite population (the
// binomial model) the interval is Clopper-Pearson's, its limit as N grows.
// Cost: a bisection over K of O(log N) tail sums per limit.
#include "covergrid/methods/numerics.hpp"
#include "covergrid/methods/registry.hpp"
#include "shared_limits.hpp"

#include <cmath>
#include <cstdint>

namespace covergrid::methods {
namespace {

class ExactHypergeometric final : public IntervalMethod {
 public:
  explicit ExactHypergeometric(double population) : population_(static_cast<std::int64_t>(population)) {}
  double lower(int x, int n, double a_lo) const override {
    if (population_ <= 0) return clopper_pearson_lower(x, n, a_lo);
    check(n);
    if (x == 0) return 0.0;
    // The smallest K with P_K(X >= x) >= a_lo, in [x, N - (n - x)]: the
    // tail is 1 at the top of the range, so the search always ends.
    std::int64_t lo = x, hi = population_ - (n - x);
    while (lo < hi) {
      const std::int64_t mid = lo + (hi - lo) / 2;
      if (hypergeometric_sf(x - 1, n, mid, population_) >= a_lo)
        hi = mid;
      else
        lo = mid + 1;
    }
    return static_cast<double>(lo) / static_cast<double>(population_);
  }
  double upper(int x, int n, double a_hi) const override {
    if (population_ <= 0) return clopper_pearson_upper(x, n, a_hi);
    check(n);
    if (x == n) return 1.0;
    // The largest K with P_K(X <= x) >= a_hi, in [x, N - (n - x)].
    std::int64_t lo = x, hi = population_ - (n - x);
    while (lo < hi) {
      const std::int64_t mid = hi - (hi - lo) / 2;
      if (hypergeometric_cdf(x, n, mid, population_) >= a_hi)
        lo = mid;
      else
        hi = mid - 1;
    }
    return static_cast<double>(lo) / static_cast<double>(population_);
  }
  std::shared_ptr<const IntervalMethod> for_design(const Design& design) const override {
    return std::make_shared<ExactHypergeometric>(design.population);
  }

 private:
  void check(int n) const {
    if (n > population_)
      throw NumericalError("exact-hypergeometric: the sample (n = " + std::to_string(n) +
                           ") is larger than the population (N = " + std::to_string(population_) + ")");
  }
  std::int64_t population_;
};

}  // namespace

MethodEntry exact_hypergeometric_entry() {
  return {{"exact-hypergeometric",
           "exact hypergeometric (finite population)",
           Family::exact_tail,
           {},
           "Buonaccorsi (1987), Amer. Statist. 41:215-218",
           "K_L=min{K: P_K(X>=x)>=a_lo}, K_U=max{K: P_K(X<=x)>=a_hi}, reported as K/N; N from the "
           "sampling model (infinite: Clopper-Pearson)",
           true},
          [](const ParamValues&) { return std::make_unique<ExactHypergeometric>(0.0); }};
}

}  // namespace covergrid::methods
