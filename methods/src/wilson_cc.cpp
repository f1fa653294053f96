// wilson-cc — the continuity-corrected score interval, Newcombe (1998),
// Statist. Med. 17:857-872, method 4:
//   L = (2np^ + z^2 - 1 - z sqrt(z^2 - 2 - 1/n + 4p^(nq^ + 1))) / (2(n + z^2)),
//   U = (2np^ + z^2 + 1 + z sqrt(z^2 + 2 - 1/n + 4p^(nq^ - 1))) / (2(n + z^2)),
// with L = 0 at x = 0 and U = 1 at x = n. One-sided: z of the single tail.
// The square-root arguments are positive except at the boundary cases that
// the definition sets; they are guarded at 0 for levels below 50 %.
#include "covergrid/methods/numerics.hpp"
#include "covergrid/methods/registry.hpp"

#include <algorithm>
#include <cmath>

namespace covergrid::methods {
namespace {

class WilsonCc final : public IntervalMethod {
 public:
  double lower(int x, int n, double a_lo) const override {
    if (x == 0) return 0.0;
    const double z = z_upper(a_lo), z2 = z * z, nn = n, p = x / nn, q = 1 - p;
    const double root = std::sqrt(std::max(0.0, z2 - 2 - 1 / nn + 4 * p * (nn * q + 1)));
    return (2 * nn * p + z2 - 1 - z * root) / (2 * (nn + z2));
  }
  double upper(int x, int n, double a_hi) const override {
    if (x == n) return 1.0;
    const double z = z_upper(a_hi), z2 = z * z, nn = n, p = x / nn, q = 1 - p;
    const double root = std::sqrt(std::max(0.0, z2 + 2 - 1 / nn + 4 * p * (nn * q - 1)));
    return (2 * nn * p + z2 + 1 + z * root) / (2 * (nn + z2));
  }
};

}  // namespace

MethodEntry wilson_cc_entry() {
  return {{"wilson-cc",
           "Wilson score, continuity-corrected",
           Family::approximate,
           {},
           "Newcombe (1998), Statist. Med. 17:857-872, method 4",
           "Newcombe's method 4 with L=0 at x=0, U=1 at x=n; one-sided: z of the tail"},
          [](const ParamValues&) { return std::make_unique<WilsonCc>(); }};
}

}  // namespace covergrid::methods
