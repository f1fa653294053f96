// mid-p — the mid-p exact interval (Lancaster 1961, J. Amer. Statist. Assoc.
// 56:223-234; Newcombe 1998, Statist. Med. 17:857-872, method 6):
//   L solves  P(X > x) + P(X = x)/2 = a_lo,   U solves  P(X < x) + P(X = x)/2 = a_hi,
// with L = 0 at x = 0 and U = 1 at x = n. One-sided bounds use the single tail.
// Solved by TOMS 748 on [0, 1], where the left sides are monotone in p (the
// bracket is guaranteed), to the tolerance in numerics.hpp (< 1e-12 in p).
// When a tail >= 1/2 leaves no root (one-sided levels below 50 %), the
// nearer end of [0, 1] is returned.
#include "covergrid/methods/numerics.hpp"
#include "covergrid/methods/registry.hpp"

namespace covergrid::methods {
namespace {

class MidP final : public IntervalMethod {
 public:
  double lower(int x, int n, double a_lo) const override {
    if (x == 0) return 0.0;
    auto f = [&](double p) { return binomial_sf(x, n, p) + 0.5 * binomial_pmf(x, n, p) - a_lo; };
    return solve_bracketed(f, 0.0, 1.0, "mid-p lower limit");
  }
  double upper(int x, int n, double a_hi) const override {
    if (x == n) return 1.0;
    auto f = [&](double p) { return binomial_cdf(x - 1, n, p) + 0.5 * binomial_pmf(x, n, p) - a_hi; };
    return solve_bracketed(f, 0.0, 1.0, "mid-p upper limit");
  }
};

}  // namespace

MethodEntry mid_p_entry() {
  return {{"mid-p",
           "Mid-p exact",
           Family::exact_tail,
           {},
           "Lancaster (1961), J. Amer. Statist. Assoc. 56:223-234; Newcombe (1998), method 6",
           "L: P(X>x)+P(X=x)/2=a_lo, U: P(X<x)+P(X=x)/2=a_hi; L=0 at x=0, U=1 at x=n"},
          [](const ParamValues&) { return std::make_unique<MidP>(); }};
}

}  // namespace covergrid::methods
