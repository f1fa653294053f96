// binomial — independent draws from an infinite population (or with
// replacement): X ~ Bin(n, p). Its window is the ratio recurrence of
// binomial_window.cpp, and the mass of one x over a p-range is a
// Beta(x + 1, n - x + 1) probability times 1/(n + 1).
//
// Its run probabilities are unimodal in p: d/dp P(X >= k) = n b(k-1; n-1, p),
// so d/dp P(a <= X <= b) = n [b(a-1; n-1, p) - b(b; n-1, p)], and the ratio
// b(a-1; n-1, p) / b(b; n-1, p) = C ((1-p)/p)^(b-a+1) falls strictly in p:
// the derivative changes sign at most once, from + to - (for a = 0 it is
// never positive, for b = n never negative).
#include "covergrid/engine/binomial_window.hpp"
#include "covergrid/engine/exact.hpp"
#include "covergrid/engine/sampling_model.hpp"
#include "covergrid/methods/numerics.hpp"

namespace covergrid::engine {
namespace {

class Binomial final : public SamplingModel {
 public:
  std::string_view kind() const override { return "binomial"; }
  void window(int n, double p, ProbabilityWindow& out) const override { fill_binomial_window(n, p, out); }
  double pmf(int x, int n, double p) const override { return methods::binomial_pmf(x, n, p); }
  double run_probability(int a, int b, int n, double p) const override {
    return engine::run_probability(a, b, n, p);
  }
  bool unimodal_runs() const override { return true; }
  std::optional<double> uniform_mass(int x, int n, double a, double b) const override {
    return beta_mass(x, n, a, b);
  }
  double mass_scale(int n) const override { return n + 1.0; }
};

}  // namespace

const SamplingModel& binomial_model() { return *binomial_model_ptr(); }

std::shared_ptr<const SamplingModel> binomial_model_ptr() {
  static const std::shared_ptr<const SamplingModel> model = std::make_shared<Binomial>();
  return model;
}

ModelEntry binomial_entry() {
  return {"binomial",
          "independent draws from an infinite population (or with replacement): X ~ Bin(n, p)",
          {},
          [](const methods::ParamValues&) { return binomial_model_ptr(); }};
}

}  // namespace covergrid::engine
