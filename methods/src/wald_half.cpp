// wald-half — the conservative normal interval p^ -/+ z / (2 sqrt n), which
// bounds p(1-p) by 1/4: the basis of the usual survey "margin of error"
// (common practice). One-sided: z of the single tail.
#include "covergrid/methods/numerics.hpp"
#include "covergrid/methods/registry.hpp"

#include <cmath>

namespace covergrid::methods {
namespace {

class WaldHalf final : public IntervalMethod {
 public:
  double lower(int x, int n, double a_lo) const override {
    return static_cast<double>(x) / n - z_upper(a_lo) / (2 * std::sqrt(static_cast<double>(n)));
  }
  double upper(int x, int n, double a_hi) const override {
    return static_cast<double>(x) / n + z_upper(a_hi) / (2 * std::sqrt(static_cast<double>(n)));
  }
};

}  // namespace

MethodEntry wald_half_entry() {
  return {{"wald-half",
           "Conservative margin of error",
           Family::approximate,
           {},
           "common practice (p(1-p) <= 1/4)",
           "p^ -/+ z/(2*sqrt(n)); one-sided: z of the single tail"},
          [](const ParamValues&) { return std::make_unique<WaldHalf>(); }};
}

}  // namespace covergrid::methods
