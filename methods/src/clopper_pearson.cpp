// clopper-pearson — the exact-tail interval of Clopper & Pearson (1934),
// Biometrika 26:404-413: L = Beta^-1(a_lo; x, n-x+1),
// U = Beta^-1(1-a_hi; x+1, n-x), L = 0 at x = 0, U = 1 at x = n.
// Each one-sided bound has coverage >= its nominal level for every n and p;
// the upper limit is computed from the upper-tail inverse, not 1 - q.
#include "covergrid/methods/numerics.hpp"
#include "covergrid/methods/registry.hpp"
#include "shared_limits.hpp"

namespace covergrid::methods {

double clopper_pearson_lower(int x, int n, double a_lo) {
  if (x == 0) return 0.0;
  return beta_quantile(x, n - x + 1.0, a_lo);
}

double clopper_pearson_upper(int x, int n, double a_hi) {
  if (x == n) return 1.0;
  return beta_quantile_upper(x + 1.0, n - x, a_hi);
}

namespace {

class ClopperPearson final : public IntervalMethod {
 public:
  double lower(int x, int n, double a_lo) const override { return clopper_pearson_lower(x, n, a_lo); }
  double upper(int x, int n, double a_hi) const override { return clopper_pearson_upper(x, n, a_hi); }
};

}  // namespace

MethodEntry clopper_pearson_entry() {
  return {{"clopper-pearson",
           "Clopper-Pearson (exact)",
           Family::exact_tail,
           {},
           "Clopper & Pearson (1934), Biometrika 26:404-413",
           "L=Beta^-1(a_lo; x, n-x+1), U=Beta^-1(1-a_hi; x+1, n-x); L=0 at x=0, U=1 at x=n",
           true},
          [](const ParamValues&) { return std::make_unique<ClopperPearson>(); }};
}

}  // namespace covergrid::methods
