// The sample-size search against closed forms and against brute force over n.
#include "covergrid/engine/exact.hpp"
#include "covergrid/engine/interval_table.hpp"
#include "covergrid/engine/sample_size.hpp"
#include "covergrid/methods/numerics.hpp"
#include "covergrid/methods/registry.hpp"

#include <boost/math/distributions/normal.hpp>
#include <catch2/catch.hpp>

#include <cmath>

using namespace covergrid;
using engine::PlanRequest;
using engine::Requirement;

namespace {

PlanRequest request(const std::string& method, double level, double p_lo, double p_hi, int n_from, int n_to) {
  PlanRequest q;
  q.method = methods::make_instance(method, {});
  q.level = level;
  q.p_lo = p_lo;
  q.p_hi = p_hi;
  q.n_from = n_from;
  q.n_to = n_to;
  return q;
}

/// First n meeting `meets` and the n from which all do, by evaluating every n.
template <class F>
std::pair<int, int> brute_force(int from, int to, F meets) {
  int first = to + 1, stable = to + 1;
  for (int n = from; n <= to; ++n)
    if (meets(n)) {
      first = n;
      break;
    }
  for (int n = to; n >= from && meets(n); --n) stable = n;
  return {first, stable};
}

}  // namespace

TEST_CASE("the conservative margin of error gives n = ceil((z / 2M)^2)", "[engine][plan]") {
  // Common practice: the conservative (p = 1/2) margin of error z / (2 sqrt(n))
  // is at most M from n = ceil((z / 2M)^2); z from Boost's normal quantile.
  for (double level : {0.90, 0.95, 0.99})
    for (double margin : {0.01, 0.02, 0.03, 0.05, 0.1}) {
      const double z = boost::math::quantile(boost::math::complement(boost::math::normal(), (1 - level) / 2));
      const int expected = static_cast<int>(std::ceil(std::pow(z / (2 * margin), 2)));
      // From expected / 2 to keep the test quick; the search starts below the answer.
      PlanRequest q = request("wald-half", level, 0.0, 1.0, expected / 2, expected + 40);
      q.requirements = {{Requirement::max_margin, margin}};
      const auto r = engine::plan_sample_size(q, 2);
      INFO("level " << level << " margin " << margin);
      REQUIRE(r.found);
      CHECK(r.first.n == expected);
      CHECK(r.stable.n == expected);
      CHECK(r.first.max_margin <= margin);
      CHECK(r.first.max_margin == Approx(z / (2 * std::sqrt(expected))).epsilon(1e-12));
    }
}

TEST_CASE("minimum-coverage plans match brute force over n", "[engine][plan]") {
  // Brute force: the full (unmirrored) table and the infimum over the whole
  // range at every n, against the search (mirrored tables, half ranges,
  // block-wise scanning from both ends).
  struct Case {
    const char* method;
    double lo, hi, target;
  };
  for (const Case& k : {Case{"wilson", 0.05, 0.95, 0.935}, Case{"agresti-coull", 0.1, 0.9, 0.945},
                        Case{"jeffreys", 0.02, 0.6, 0.94}, Case{"wald", 0.1, 0.9, 0.93}}) {
    const auto m = methods::make_instance(k.method, {});
    const auto [first, stable] = brute_force(1, 300, [&](int n) {
      const auto t = engine::build_table(*m.method, n, 0.95, methods::Side::two_sided);
      return engine::coverage_infimum(t, k.lo, k.hi).value >= k.target;
    });
    PlanRequest q = request(k.method, 0.95, k.lo, k.hi, 1, 300);
    q.requirements = {{Requirement::min_coverage, k.target}};
    const auto r = engine::plan_sample_size(q, 2);
    INFO(k.method);
    CHECK(r.found == (first <= 300));
    CHECK(r.stable_found == (stable <= 300));
    if (r.found) CHECK(r.first.n == first);
    if (r.stable_found) CHECK(r.stable.n == stable);
    if (r.found) CHECK(r.first.inf_coverage >= k.target);
    if (r.stable_found) CHECK(r.evaluated < 300);  // the middle was skipped
  }
}

TEST_CASE("mean-coverage and width plans match brute force over n", "[engine][plan]") {
  const auto m = methods::make_instance("wilson", {});
  {
    const auto [first, stable] = brute_force(1, 200, [&](int n) {
      const auto t = engine::build_table(*m.method, n, 0.90, methods::Side::two_sided);
      return engine::coverage_uniform_mean(t, 0.05, 0.5) >= 0.9;
    });
    PlanRequest q = request("wilson", 0.90, 0.05, 0.5, 1, 200);
    q.requirements = {{Requirement::mean_coverage, 0.9}};
    const auto r = engine::plan_sample_size(q, 2);
    CHECK(r.first.n == first);
    CHECK(r.stable.n == stable);
  }
  {
    // The largest expected width over the range, by a 20,001-point grid of
    // direct sums, agrees with max_expected_width (grid + Brent) and never
    // exceeds it by more than rounding.
    for (int n : {5, 40, 333}) {
      const auto t = engine::build_table(*m.method, n, 0.95, methods::Side::two_sided);
      double grid = 0;
      for (int i = 0; i <= 20000; ++i) {
        const double p = 0.1 + 0.5 * i / 20000.0;
        double w = 0;
        for (int x = 0; x <= n; ++x)
          w += methods::binomial_pmf(x, n, p) * t.width[static_cast<std::size_t>(x)];
        grid = std::max(grid, w);
      }
      const auto best = engine::max_expected_width(t, 0.1, 0.6);
      CHECK(best.first >= grid - 1e-12);
      CHECK(best.first == Approx(grid).margin(1e-7));
    }
    const auto [first, stable] = brute_force(1, 400, [&](int n) {
      const auto t = engine::build_table(*m.method, n, 0.95, methods::Side::two_sided);
      return engine::max_expected_width(t, 0.1, 0.6).first <= 0.1;
    });
    PlanRequest q = request("wilson", 0.95, 0.1, 0.6, 1, 400);
    q.requirements = {{Requirement::max_width, 0.1}};
    const auto r = engine::plan_sample_size(q, 2);
    CHECK(r.first.n == first);
    CHECK(r.stable.n == stable);
    CHECK(r.first.max_width <= 0.1);
  }
}

TEST_CASE("no n meets an impossible requirement", "[engine][plan]") {
  PlanRequest q = request("wald", 0.95, 0.0, 1.0, 1, 400);
  q.requirements = {{Requirement::min_coverage, 0.9}};  // Wald's coverage is 0 near p = 0
  const auto r = engine::plan_sample_size(q, 2);
  CHECK_FALSE(r.found);
  CHECK_FALSE(r.stable_found);
  CHECK(r.evaluated == 400);
}

TEST_CASE("one-sided margins run from the estimate to the finite limit", "[engine][plan]") {
  CHECK(engine::margin_of_error(0.2, 1.0, 3, 10, methods::Side::lower_bound) == Approx(0.1));
  CHECK(engine::margin_of_error(0.0, 0.45, 3, 10, methods::Side::upper_bound) == Approx(0.15));
  CHECK(engine::margin_of_error(0.2, 0.45, 3, 10, methods::Side::two_sided) == Approx(0.125));
}
