// wald-cc — continuity-corrected Wald interval,
// p^ -/+ (z sqrt(p^ q^ / n) + 1/(2n)).
// Reference: Newcombe (1998), Statist. Med. 17:857-872, method 2.
// One-sided: the same formula with z of the single tail.
#include "covergrid/methods/numerics.hpp"
#include "covergrid/methods/registry.hpp"

#include <cmath>

namespace covergrid::methods {
namespace {

class WaldCc final : public IntervalMethod {
 public:
  double lower(int x, int n, double a_lo) const override {
    return static_cast<double>(x) / n - half(x, n, a_lo);
  }
  double upper(int x, int n, double a_hi) const override {
    return static_cast<double>(x) / n + half(x, n, a_hi);
  }

 private:
  static double half(int x, int n, double tail) {
    const double p = static_cast<double>(x) / n;
    return z_upper(tail) * std::sqrt(p * (1 - p) / n) + 0.5 / n;
  }
};

}  // namespace

MethodEntry wald_cc_entry() {
  return {{"wald-cc",
           "Wald, continuity-corrected",
           Family::approximate,
           {},
           "Newcombe (1998), Statist. Med. 17:857-872, method 2",
           "p^ -/+ (z*sqrt(p^(1-p^)/n) + 1/(2n)); one-sided: z of the single tail"},
          [](const ParamValues&) { return std::make_unique<WaldCc>(); }};
}

}  // namespace covergrid::methods
