// bayes-hpd — the highest-posterior-density interval of the posterior
// Beta(x + a, n - x + b) under a Beta(a, b) prior (standard Bayesian practice;
// e.g. Berger 1985, Statistical Decision Theory and Bayesian Analysis, 4.3.2).
// Two-sided: the shortest set of posterior mass 1 - alpha. When the density is
// monotone it is [0, Q(1 - alpha)] or [Q(alpha), 1]; otherwise L solves
// log f(Q(u)) = log f(Q(u + 1 - alpha)) for the lower tail mass u, by
// TOMS 748 on u in (0, alpha), where the difference changes sign. The comparison is made on
// log densities, so it neither overflows nor underflows at large n.
// One-sided bounds are the posterior quantiles Q(alpha) (lower bound) and
// Q(1 - alpha) (upper bound): HPD has no one-sided form of its own.
// The method is symmetric in x <-> n - x only when a = b.
#include "covergrid/methods/numerics.hpp"
#include "covergrid/methods/registry.hpp"

#include <cmath>

namespace covergrid::methods {
namespace {

class BayesHpd final : public IntervalMethod {
 public:
  BayesHpd(double a, double b) : a_(a), b_(b) {}
  double lower(int x, int n, double a_lo) const override { return beta_quantile(x + a_, n - x + b_, a_lo); }
  double upper(int x, int n, double a_hi) const override {
    return beta_quantile_upper(x + a_, n - x + b_, a_hi);
  }
  RawLimits two_sided(int x, int n, double alpha) const override {
    const double s = x + a_, t = n - x + b_;
    if (s <= 1 && t > 1) return {0.0, beta_quantile(s, t, 1 - alpha)};
    if (t <= 1 && s > 1) return {beta_quantile_upper(s, t, 1 - alpha), 1.0};
    if (s <= 1 && t <= 1) {
      // U-shaped (only possible with n = 1 and small priors): the HPD set is
      // two pieces; report the equal-tailed interval instead.
      return {beta_quantile(s, t, alpha / 2), beta_quantile_upper(s, t, alpha / 2)};
    }
    // Parametrise by the lower tail mass u = F(L) in (0, alpha): then
    // U = Q(u + 1 - alpha), taken as the upper-tail quantile at alpha - u,
    // and the log-density gap falls from + to -.
    // A quantile that rounds to 0 or 1 has log density -inf (its sign is
    // right: that end is too far out); TOMS 748 interpolates through the
    // value, so it gets +-1e30 instead, beyond any finite gap (|log density|
    // <= (s + t) * 745 < 1e10) yet safe to subtract (an infinite gap gave
    // NaN steps at x = 999999, n = 10^6, level 1 - 1e-9).
    auto gap = [&](double u) {
      const double g = beta_log_kernel(s, t, beta_quantile_upper(s, t, alpha - u)) -
                       beta_log_kernel(s, t, beta_quantile(s, t, u));
      if (std::isinf(g)) return std::copysign(1e30, g);
      return g;
    };
    const double u = solve_bracketed(gap, alpha * 1e-12, alpha * (1 - 1e-12), "bayes-hpd lower tail mass");
    return {beta_quantile(s, t, u), beta_quantile_upper(s, t, alpha - u)};
  }
  bool symmetric() const override { return a_ == b_; }

 private:
  double a_, b_;
};

}  // namespace

MethodEntry bayes_hpd_entry() {
  // [1e-3, 1e6]: from far flatter than Jeffreys' 1/2 to a prior worth a
  // million trials; a = 1e16 exhausted the root finder's iterations.
  ParamSpec a{
      "a", ParamSpec::Kind::number, 1.0, "prior Beta(a, b): first shape, in [0.001, 1e6]", {}, 1e-3, 1e6,
      true};
  ParamSpec b{
      "b", ParamSpec::Kind::number, 1.0, "prior Beta(a, b): second shape, in [0.001, 1e6]", {}, 1e-3, 1e6,
      true};
  return {{"bayes-hpd",
           "Bayesian HPD",
           Family::bayesian,
           {a, b},
           "standard Bayesian practice (highest posterior density of Beta(x+a, n-x+b))",
           "shortest posterior-mass 1-alpha set; one-sided: posterior quantiles"},
          [](const ParamValues& p) {
            return std::make_unique<BayesHpd>(std::get<double>(p.at("a")), std::get<double>(p.at("b")));
          }};
}

}  // namespace covergrid::methods
