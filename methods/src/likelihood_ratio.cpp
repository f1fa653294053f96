// likelihood-ratio — inversion of the likelihood-ratio test (Newcombe 1998,
// Statist. Med. 17:857-872, method 7): {p : 2[l(p^) - l(p)] <= c} with
// l(p) = x log p + (n - x) log(1 - p). For a limit at tail t we use
// c = z(t)^2, so the two-sided interval at 1 - alpha has the chi^2_1(1 - alpha)
// cutoff and each one-sided bound is the signed-root inversion at its tail.
// Lower limit: write p = p^ exp(-s). With g(s) = 2[l(p^) - l(p)] - c, one has
// g(c/(2x)) <= 0 <= g(1 + c/(2x)) (the (n - x) term lies in [-2x, 0]), a
// guaranteed bracket on which TOMS 748 runs in s; L = 0 at x = 0. The upper
// limit follows from the x <-> n - x symmetry, U(x) = 1 - L(n - x), with
// U = 1 at x = n. Closed form at x = n for the lower limit: L = exp(-c/(2n)).
#include "covergrid/methods/numerics.hpp"
#include "covergrid/methods/registry.hpp"

#include <cmath>

namespace covergrid::methods {
namespace {

double lr_lower(int x, int n, double tail) {
  if (x == 0) return 0.0;
  const double z = z_upper(tail);
  const double c = z * z;
  if (x == n) return std::exp(-c / (2.0 * n));  // l(p^) = 0, l(p) = n log p
  const double ph = static_cast<double>(x) / n;
  const double log_qh = std::log1p(-ph);
  auto g = [&](double s) {
    const double p = ph * std::exp(-s);
    return 2.0 * (x * s + (n - x) * (log_qh - std::log1p(-p))) - c;
  };
  const double s0 = c / (2.0 * x);
  const double s = solve_bracketed(g, s0, s0 + 1.0, "likelihood-ratio limit");
  return ph * std::exp(-s);
}

class LikelihoodRatio final : public IntervalMethod {
 public:
  double lower(int x, int n, double a_lo) const override { return lr_lower(x, n, a_lo); }
  double upper(int x, int n, double a_hi) const override {
    if (x == n) return 1.0;
    if (x == 0) {
      const double z = z_upper(a_hi);
      return -std::expm1(-z * z / (2.0 * n));  // 1 - exp(-c/(2n)) without cancellation
    }
    return 1.0 - lr_lower(n - x, n, a_hi);
  }
};

}  // namespace

MethodEntry likelihood_ratio_entry() {
  return {{"likelihood-ratio",
           "Likelihood ratio",
           Family::likelihood,
           {},
           "Newcombe (1998), Statist. Med. 17:857-872, method 7",
           "{p: 2[l(p^)-l(p)] <= z(tail)^2}; one-sided: signed-root inversion at the tail"},
          [](const ParamValues&) { return std::make_unique<LikelihoodRatio>(); }};
}

}  // namespace covergrid::methods
