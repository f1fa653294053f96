// blaker — inversion of Blaker's acceptability function (Blaker 2000,
// Canad. J. Statist. 28:783-798). Two-sided only (the one-sided version of
// the construction is the one-sided Clopper-Pearson bound, available as
// clopper-pearson). The interval is nested in the level and lies inside the
// Clopper-Pearson interval of the same level.
//
// Acceptability of p given x, with t1 = P(X >= x) and t2 = P(X <= x):
//   a1 = t1 + P(X <= k1), k1 the largest k with P(X <= k) <= t1;
//   a2 = t2 + P(X >= k2), k2 the smallest k with P(X >= k) <= t2;
//   gamma = min(1, a1, a2); the confidence set is {p : gamma(p) > alpha}.
// Lower limit: since t1 <= gamma <= 2 t1 below p^, it lies in
// [CP_L(alpha/2), CP_L(alpha)] (one-sided Clopper-Pearson bounds). gamma is
// only piecewise continuous there, so we scan the bracket at 32 equal steps,
// take the first accepted point, and bisect between it and the last rejected
// one down to adjacent doubles, returning the accepted one. An accepted excursion narrower than
// one scan step before the first accepted scan point would be missed; Blaker's
// own algorithm steps through p in the same way. Upper limit by symmetry,
// U(x) = 1 - L(n - x); L = 0 at x = 0, U = 1 at x = n.
#include "covergrid/methods/numerics.hpp"
#include "covergrid/methods/registry.hpp"
#include "shared_limits.hpp"

#include <algorithm>

namespace covergrid::methods {
namespace {

/// Largest k in [-1, hi] with P(X <= k) <= t (P(X <= -1) = 0), by bisection.
/// Ties count: Blaker's definition uses <=, and at points of symmetry such as
/// p = 1/2 the two tails are equal in exact arithmetic but may differ in the
/// last bits, so a relative slack of 1e-12 keeps the tie a tie.
int largest_cdf_at_most(int hi, int n, double p, double t) {
  t *= 1 + 1e-12;
  int lo = -1;  // invariant: cdf(lo) <= t
  if (binomial_cdf(hi, n, p) <= t) return hi;
  while (hi - lo > 1) {  // invariant: cdf(hi) > t
    const int mid = lo + (hi - lo) / 2;
    if (binomial_cdf(mid, n, p) <= t)
      lo = mid;
    else
      hi = mid;
  }
  return lo;
}

double acceptability(int x, int n, double p) {
  const double t1 = binomial_sf(x - 1, n, p);  // P(X >= x)
  const double t2 = binomial_cdf(x, n, p);     // P(X <= x)
  auto a1 = [&] {
    if (x == 0) return t1;
    const int k = largest_cdf_at_most(x - 1, n, p, t1);
    return t1 + (k >= 0 ? binomial_cdf(k, n, p) : 0.0);
  };
  auto a2 = [&] {
    // P(X >= k) = P(X <= n - k) for the mirrored variable: reuse the search.
    if (x == n) return t2;
    const int k = largest_cdf_at_most(n - x - 1, n, 1 - p, t2);  // k = n - k2
    return t2 + (k >= 0 ? binomial_cdf(k, n, 1 - p) : 0.0);
  };
  double g = 0;
  if (t1 <= t2) {
    g = a1();
    if (t2 < g) g = std::min(g, a2());
  } else {
    g = a2();
    if (t1 < g) g = std::min(g, a1());
  }
  return std::min(1.0, g);
}

double blaker_lower(int x, int n, double alpha) {
  if (x == 0) return 0.0;
  const double lo = clopper_pearson_lower(x, n, alpha / 2);
  const double hi = clopper_pearson_lower(x, n, alpha);
  constexpr int steps = 32;
  double rejected = lo;
  for (int i = 1; i <= steps; ++i) {
    const double p = lo + (hi - lo) * i / steps;
    if (acceptability(x, n, p) > alpha) {
      double accepted = p;
      // Bisect to the last bit: the limit is often a jump of gamma, and a grid
      // p placed exactly on it (p = 1/2, say) must fall on the accepted side.
      for (int it = 0; it < 200; ++it) {
        const double mid = 0.5 * (rejected + accepted);
        if (mid == rejected || mid == accepted) break;
        if (acceptability(x, n, mid) > alpha)
          accepted = mid;
        else
          rejected = mid;
      }
      return accepted;
    }
    rejected = p;
  }
  return hi;  // every p above CP_L(alpha) is accepted (gamma >= t1 > alpha)
}

class Blaker final : public IntervalMethod {
 public:
  double lower(int, int, double) const override {
    throw ParameterError("side", "blaker is defined for two-sided intervals only");
  }
  double upper(int, int, double) const override {
    throw ParameterError("side", "blaker is defined for two-sided intervals only");
  }
  RawLimits two_sided(int x, int n, double alpha) const override {
    return {blaker_lower(x, n, alpha), x == n ? 1.0 : 1.0 - blaker_lower(n - x, n, alpha)};
  }
  bool supports(Side side) const override { return side == Side::two_sided; }
};

}  // namespace

MethodEntry blaker_entry() {
  return {{"blaker",
           "Blaker (acceptability)",
           Family::exact_tail,
           {},
           "Blaker (2000), Canad. J. Statist. 28:783-798",
           "inversion of Blaker's acceptability function; two-sided only"},
          [](const ParamValues&) { return std::make_unique<Blaker>(); }};
}

}  // namespace covergrid::methods
