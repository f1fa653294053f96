// logit — the back-transformed Wald interval on the log-odds scale
// (Brown, Cai & DasGupta 2001, Statist. Sci. 16:101-133):
//   lambda = log(x/(n - x)), V = n/(x(n - x)), limits expit(lambda -/+ z sqrt V).
// It is undefined at x = 0 and x = n. Parameter `boundary` chooses the
// convention there:
//   "clopper-pearson" (default): both limits are the Clopper-Pearson limits;
//   "add-half": the Haldane-Anscombe correction at every x, i.e.
//     lambda = log((x + 1/2)/(n - x + 1/2)), V = 1/(x + 1/2) + 1/(n - x + 1/2).
// One-sided: z of the single tail. Limits always lie in (0, 1).
#include "covergrid/methods/numerics.hpp"
#include "covergrid/methods/registry.hpp"
#include "shared_limits.hpp"

#include <cmath>
#include <string>

namespace covergrid::methods {
namespace {

double expit(double v) { return v >= 0 ? 1.0 / (1.0 + std::exp(-v)) : std::exp(v) / (1.0 + std::exp(v)); }

class Logit final : public IntervalMethod {
 public:
  explicit Logit(bool add_half) : add_half_(add_half) {}
  double lower(int x, int n, double a_lo) const override {
    if (!add_half_ && (x == 0 || x == n)) return clopper_pearson_lower(x, n, a_lo);
    return limit(x, n, -z_upper(a_lo));
  }
  double upper(int x, int n, double a_hi) const override {
    if (!add_half_ && (x == 0 || x == n)) return clopper_pearson_upper(x, n, a_hi);
    return limit(x, n, z_upper(a_hi));
  }

 private:
  double limit(int x, int n, double signed_z) const {
    double lambda = 0, v = 0;
    if (add_half_) {
      lambda = std::log((x + 0.5) / (n - x + 0.5));
      v = 1.0 / (x + 0.5) + 1.0 / (n - x + 0.5);
    } else {
      lambda = std::log(static_cast<double>(x) / (n - x));
      v = static_cast<double>(n) / (static_cast<double>(x) * (n - x));
    }
    return expit(lambda + signed_z * std::sqrt(v));
  }
  bool add_half_;
};

}  // namespace

MethodEntry logit_entry() {
  ParamSpec boundary{"boundary",
                     ParamSpec::Kind::choice,
                     std::string("clopper-pearson"),
                     "convention at x = 0 and x = n",
                     {"clopper-pearson", "add-half"},
                     0,
                     0};
  return {{"logit",
           "Logit",
           Family::approximate,
           {boundary},
           "Brown, Cai & DasGupta (2001), Statist. Sci. 16:101-133",
           "expit(log(x/(n-x)) -/+ z*sqrt(n/(x(n-x)))); x=0, x=n per `boundary`"},
          [](const ParamValues& p) {
            return std::make_unique<Logit>(std::get<std::string>(p.at("boundary")) == "add-half");
          }};
}

}  // namespace covergrid::methods
