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
// [CP_L(alpha/2), min(CP_L(alpha), p^)] (one-sided Clopper-Pearson bounds;
// p^ = x/n is the median of Bin(n, p^), so gamma(p^) = 1 and p^ is always
// accepted, while above 1/2 CP_L(alpha) lies beyond p^ and is not: levels
// below 1/2 once returned CP_L(alpha) there, a lower limit above the upper
// one). For levels
// of 2/3 and above it is found exactly by a piecewise analysis of gamma (see
// blaker_lower); the accepted set is not always an interval, and a plain scan
// of p can miss a narrow accepted excursion and so give an interval whose
// coverage falls below nominal. Below 2/3 we fall back to Blaker's own scan.
// Upper limit by symmetry, U(x) = 1 - L(n - x); L = 0 at x = 0, U = 1 at x = n.
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

/// Bisects [rejected, accepted] down to adjacent doubles and returns the
/// accepted end: the limit is often a jump of gamma, and a grid p placed
/// exactly on it (p = 1/2, say) must fall on the accepted side.
template <class Accepts>
double bisect_to_adjacent(double rejected, double accepted, Accepts accepts) {
  for (int it = 0; it < 200; ++it) {
    const double mid = 0.5 * (rejected + accepted);
    if (mid == rejected || mid == accepted) break;
    if (accepts(mid))
      accepted = mid;
    else
      rejected = mid;
  }
  return accepted;
}

/// The scan of Blaker's own algorithm, used only for levels below 2/3, where
/// the piecewise analysis below does not apply: 32 equal steps over the
/// bracket, then bisection of the first accepted step.
double blaker_lower_scan(int x, int n, double alpha, double lo, double hi) {
  constexpr int steps = 32;
  double rejected = lo;
  for (int i = 1; i <= steps; ++i) {
    const double p = lo + (hi - lo) * i / steps;
    if (acceptability(x, n, p) > alpha)
      return bisect_to_adjacent(rejected, p, [&](double t) { return acceptability(x, n, t) > alpha; });
    rejected = p;
  }
  return hi;
}

/// The lower limit, exactly. On the bracket [CP_L(alpha/2), CP_L(alpha)]
/// t1 <= alpha, so a1 <= 2 alpha while a2 >= t2 >= 1 - alpha: for alpha <= 1/3
/// gamma = a1 = t1(p) + F(k*(p); p). F(k; p) - t1(p) falls strictly in p, so
/// k* steps up by one at points p_k (roots found by TOMS 748), and on each
/// piece [p_k, p_k+1) gamma_k = t1 + F(k) has derivative
/// n [b(x-1; n-1, p) - b(k; n-1, p)], which changes sign at most once (from -
/// to +): gamma_k is quasi-convex on the piece. So the first accepted p of a
/// piece is its start, or the single up-crossing found by bisection, or none;
/// the pieces are visited in order and the first accepted p is the limit.
double blaker_lower(int x, int n, double alpha) {
  if (x == 0) return 0.0;
  const double lo = clopper_pearson_lower(x, n, alpha / 2);
  // alpha <= 1/2 keeps CP_L(alpha) <= p^ (P(X >= x; p^) >= 1/2); beyond it
  // the bracket ends at p^, which is accepted.
  const double p_hat = static_cast<double>(x) / n;
  const double hi = std::min(clopper_pearson_lower(x, n, alpha), p_hat);
  if (alpha > 1.0 / 3.0) return blaker_lower_scan(x, n, alpha, lo, hi);
  auto t1 = [&](double p) { return binomial_sf(x - 1, n, p); };  // P(X >= x)
  int k = largest_cdf_at_most(x - 1, n, lo, t1(lo));
  double start = lo;
  for (int guard = 0; guard <= n + 1; ++guard) {
    // The piece [start, end) on which k* = k.
    double end = hi;
    bool jump = false;
    if (k + 1 <= x - 1) {
      const int next = k + 1;
      auto gap = [&](double p) { return binomial_cdf(next, n, p) - t1(p); };
      if (gap(hi) <= 0) {
        end = gap(start) <= 0 ? start : solve_bracketed(gap, start, hi, "blaker piece boundary");
        jump = true;
      }
    }
    auto gamma_k = [&](double p) { return t1(p) + (k >= 0 ? binomial_cdf(k, n, p) : 0.0); };
    // A piece start is a root, known to the solver's 4e-14 relative; at ties
    // such as p = 1/2 it is exact in theory (U(x) = L(x') there). Stepping
    // 1e-13 relative to the safe side keeps the interval at least as wide as
    // the true one, so a grid p on the jump is covered.
    if (gamma_k(start) > alpha) return start == lo ? start : start * (1 - 1e-13);
    if (gamma_k(end) > alpha)
      return bisect_to_adjacent(start, end, [&](double p) { return gamma_k(p) > alpha; });
    if (!jump) return hi;  // just above CP_L(alpha), t1 > alpha: accepted
    start = end;
    ++k;
  }
  throw NumericalError("blaker: too many pieces in the lower-limit bracket");
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
           "inversion of Blaker's acceptability function; two-sided only",
           true},
          [](const ParamValues&) { return std::make_unique<Blaker>(); }};
}

}  // namespace covergrid::methods
