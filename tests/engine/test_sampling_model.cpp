// The sampling-model seam: the registry, the binomial model against the
// binomial functions it wraps, and the engine's model-free paths (a model
// whose runs are not known to be unimodal is searched densely and flagged;
// a model without a closed-form mass takes its uniform means by quadrature).
#include "covergrid/engine/binomial_window.hpp"
#include "covergrid/engine/exact.hpp"
#include "covergrid/engine/interval_table.hpp"
#include "covergrid/engine/sampling_model.hpp"
#include "covergrid/methods/numerics.hpp"
#include "covergrid/methods/registry.hpp"

#include <catch2/catch.hpp>

#include <cstring>
#include <stdexcept>

namespace e = covergrid::engine;
namespace m = covergrid::methods;

namespace {

/// The binomial law without the binomial's two proofs: unimodal runs and a
/// closed-form mass over p. The engine must then take its general paths.
class PlainBinomial final : public e::SamplingModel {
 public:
  std::string_view kind() const override { return "plain-binomial"; }
  void window(int n, double p, e::ProbabilityWindow& out) const override {
    e::binomial_model().window(n, p, out);
  }
  double pmf(int x, int n, double p) const override { return m::binomial_pmf(x, n, p); }
  double run_probability(int a, int b, int n, double p) const override {
    return e::binomial_model().run_probability(a, b, n, p);
  }
  bool unimodal_runs() const override { return false; }
};

}  // namespace

TEST_CASE("the model registry lists the binomial model", "[engine][model]") {
  REQUIRE(e::find_model("binomial") != nullptr);
  CHECK(e::find_model("no-such-model") == nullptr);
  const auto made = e::find_model("binomial")->make({});
  CHECK(made->kind() == "binomial");
  CHECK(made.get() == &e::binomial_model());  // shared, stateless
  CHECK(e::model_registry().size() >= 1);
}

TEST_CASE("the binomial model's window is the binomial window, bit for bit", "[engine][model]") {
  const e::SamplingModel& model = e::binomial_model();
  for (int n : {1, 7, 200, 100000})
    for (double p : {0.0, 1e-9, 0.03, 0.5, 0.97, 1.0}) {
      e::BinomialWindow direct;
      direct.fill(n, p);
      e::ProbabilityWindow through;
      model.window(n, p, through);
      INFO("n = " << n << ", p = " << p);
      CHECK(through.lo == direct.lo);
      CHECK(through.hi == direct.hi);
      REQUIRE(through.w.size() == direct.w.size());
      CHECK(std::memcmp(through.w.data(), direct.w.data(), direct.w.size() * sizeof(double)) == 0);
      CHECK(through.cum.back() == direct.cum.back());
      CHECK(through.tail_bound == 5e-16);
      // The window's mass and the model's direct probabilities agree.
      CHECK(through.cum.back() == Approx(1.0).margin(1e-14));
      const int mid = (through.lo + through.hi) / 2;
      CHECK(model.pmf(mid, n, p) ==
            Approx(through.w[static_cast<std::size_t>(mid - through.lo)]).epsilon(1e-12));
      CHECK(model.run_probability(through.lo, through.hi, n, p) == Approx(1.0).margin(1e-14));
    }
  CHECK(model.run_probability(5, 4, 10, 0.3) == 0.0);
  // The closed-form mass of every x over [0, 1], in units of 1/(n + 1), is 1.
  for (int x : {0, 3, 9}) CHECK(*model.uniform_mass(x, 9, 0.0, 1.0) / model.mass_scale(9) == Approx(0.1));
}

TEST_CASE("without unimodal runs the worst case is searched densely and flagged", "[engine][model]") {
  const PlainBinomial plain;
  const auto wilson = m::make_instance("wilson", {});
  const auto t = e::build_table(*wilson.method, 30, 0.95, m::Side::two_sided);
  const auto exact = e::coverage_infimum(t, 0.05, 0.95);
  const auto dense = e::coverage_infimum(t, 0.05, 0.95, -HUGE_VAL, plain);
  CHECK_FALSE(exact.refined);
  CHECK(dense.refined);
  // Sampling can only find values the coverage takes (one-sided limits at
  // the segment ends included), so never below the exact infimum, and 33
  // points per segment come close to it at n = 30.
  CHECK(dense.value >= exact.value - 1e-12);
  CHECK(dense.value <= exact.value + 0.01);
  const auto below_exact = e::coverage_measure_below(t, 0.05, 0.95, 0.95);
  const auto below_dense = e::coverage_measure_below(t, 0.05, 0.95, 0.95, plain);
  CHECK_FALSE(below_exact.approximate);
  CHECK(below_dense.approximate);
  CHECK(below_dense.measure == Approx(below_exact.measure).margin(0.05));
  // Point values go through the model's own pmf.
  CHECK(e::coverage_by_enumeration(t, 0.3, plain) ==
        Approx(e::coverage_by_enumeration(t, 0.3)).epsilon(1e-14));
  // No closed-form mass over p: the means come from Gauss-Legendre
  // quadrature per segment, held here to the binomial's closed form.
  CHECK(e::coverage_uniform_mean(t, 0.05, 0.95, plain) ==
        Approx(e::coverage_uniform_mean(t, 0.05, 0.95)).margin(1e-10));
  const auto quad = e::miss_uniform_means(t, 0.05, 0.95, plain),
             closed = e::miss_uniform_means(t, 0.05, 0.95);
  CHECK(quad[0] == Approx(closed[0]).margin(1e-10));
  CHECK(quad[1] == Approx(closed[1]).margin(1e-10));
  CHECK(e::coverage_uniform_mean(t, 0.3, 0.3, plain) == e::coverage_by_enumeration(t, 0.3, plain));
}
