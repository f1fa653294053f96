// jeffreys — the equal-tailed Jeffreys interval: quantiles of the posterior
// Beta(x + 1/2, n - x + 1/2) at a_lo and 1 - a_hi (Brown, Cai & DasGupta 2001,
// Statist. Sci. 16:101-133). Parameter `boundary` (default true) applies their
// modification L = 0 at x = 0 and U = 1 at x = n. One-sided bounds are the
// posterior quantiles of the single tail.
#include "covergrid/methods/numerics.hpp"
#include "covergrid/methods/registry.hpp"

namespace covergrid::methods {
namespace {

class Jeffreys final : public IntervalMethod {
 public:
  explicit Jeffreys(bool boundary) : boundary_(boundary) {}
  double lower(int x, int n, double a_lo) const override {
    if (boundary_ && x == 0) return 0.0;
    return beta_quantile(x + 0.5, n - x + 0.5, a_lo);
  }
  double upper(int x, int n, double a_hi) const override {
    if (boundary_ && x == n) return 1.0;
    return beta_quantile_upper(x + 0.5, n - x + 0.5, a_hi);
  }

 private:
  bool boundary_;
};

}  // namespace

MethodEntry jeffreys_entry() {
  ParamSpec boundary{
      "boundary", ParamSpec::Kind::boolean, true, "set L = 0 at x = 0 and U = 1 at x = n", {}, 0, 0};
  return {{"jeffreys",
           "Jeffreys (equal-tailed)",
           Family::bayesian,
           {boundary},
           "Brown, Cai & DasGupta (2001), Statist. Sci. 16:101-133",
           "Beta(x+1/2, n-x+1/2) quantiles at a_lo and 1-a_hi; one-sided: single tail"},
          [](const ParamValues& p) { return std::make_unique<Jeffreys>(std::get<bool>(p.at("boundary"))); }};
}

}  // namespace covergrid::methods
