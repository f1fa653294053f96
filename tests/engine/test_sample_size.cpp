// The sample-size search against closed forms and against brute force over n.
#include "covergrid/engine/coverage_rule.hpp"
#include "covergrid/engine/exact.hpp"
#include "covergrid/engine/interval_table.hpp"
#include "covergrid/engine/sample_size.hpp"
#include "covergrid/methods/numerics.hpp"
#include "covergrid/methods/registry.hpp"

#include <boost/math/distributions/normal.hpp>
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <string>
#include <vector>

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

namespace {

/// Brute force for a margin requirement: every n's full table, the largest
/// margin over x and the zero-width rule.
bool margin_met_by_table(const methods::MethodInstance& m, int n, double level, methods::Side side,
                         double margin) {
  const auto t = engine::build_table(*m.method, n, level, side);
  double largest = 0;
  for (int x = 0; x <= n; ++x) {
    const std::size_t i = static_cast<std::size_t>(x);
    if (t.upper[i] - t.lower[i] <= engine::zero_width_tolerance) return false;
    largest = std::max(largest, engine::margin_of_error(t.lower[i], t.upper[i], x, n, side));
  }
  return largest <= margin;
}

}  // namespace

TEST_CASE("zero-width intervals meet no margin or width requirement", "[engine][plan]") {
  // Wald gives [0, 0] at x = 0 at every n (and at n = 1 only zero-width
  // intervals): its margin plan used to answer n = 1.
  PlanRequest q = request("wald", 0.95, 0.0, 1.0, 1, 1500);
  q.requirements = {{Requirement::max_margin, 0.03}};
  auto r = engine::plan_sample_size(q, 2);
  CHECK_FALSE(r.found);
  CHECK(r.at_end.n == 1500);
  CHECK(r.at_end.zero_width_x == 0);
  CHECK(r.at_end.zero_width_count == 2);  // x = 0 and x = n
  q.requirements = {{Requirement::max_width, 0.5}};
  r = engine::plan_sample_size(q, 2);
  CHECK_FALSE(r.found);
  // Wald with continuity correction never has a zero-width interval: its
  // answer is the brute-force one, well above 1, with no zero width.
  q = request("wald-cc", 0.95, 0.0, 1.0, 1, 1500);
  q.requirements = {{Requirement::max_margin, 0.03}};
  r = engine::plan_sample_size(q, 2);
  const auto m = methods::make_instance("wald-cc", {});
  const auto [first, stable] = brute_force(
      1, 1500, [&](int n) { return margin_met_by_table(m, n, 0.95, methods::Side::two_sided, 0.03); });
  REQUIRE(r.found);
  CHECK(r.first.n == first);
  CHECK(r.stable.n == stable);
  CHECK(r.first.n > 1000);
  CHECK(r.first.zero_width_x == -1);
  CHECK(r.first.max_margin <= 0.03);
}

TEST_CASE("closed-form largest margins equal the table's", "[engine][plan]") {
  // The closed form (the middle x, when unclipped) against the largest margin
  // over every x of the full table, for every n up to 600 and each side.
  for (const char* id : {"wilson", "wald-half"})
    for (auto side : {methods::Side::two_sided, methods::Side::lower_bound, methods::Side::upper_bound})
      for (double level : {0.9, 0.99}) {
        PlanRequest q = request(id, level, 0.0, 1.0, 1, 600);
        q.side = side;
        int used = 0;
        for (int n = 1; n <= 600; ++n) {
          const double closed = engine::closed_form_max_margin(q, n);
          if (closed < 0) continue;
          ++used;
          const auto f = engine::plan_figures(q, n);
          INFO(id << " n " << n << " side " << methods::side_name(side));
          CHECK(closed == Approx(f.max_margin).epsilon(0).margin(1e-15));
          CHECK(f.zero_width_x == -1);
        }
        INFO(id << " side " << methods::side_name(side) << " level " << level);
        // Wilson one-sided has no closed form; the others apply from small n on.
        if (std::string(id) == "wilson" && side != methods::Side::two_sided)
          CHECK(used == 0);
        else
          CHECK(used > 550);
      }
}

TEST_CASE("margin plans match brute force over n", "[engine][plan]") {
  struct Case {
    const char* method;
    methods::Side side;
    double level, margin;
  };
  for (const Case& k : {Case{"wilson", methods::Side::two_sided, 0.95, 0.05},
                        Case{"wald-half", methods::Side::lower_bound, 0.9, 0.04},
                        Case{"clopper-pearson", methods::Side::two_sided, 0.95, 0.06},
                        Case{"jeffreys", methods::Side::upper_bound, 0.99, 0.07},
                        Case{"agresti-coull", methods::Side::two_sided, 0.9, 0.045}}) {
    const auto m = methods::make_instance(k.method, {});
    const auto [first, stable] =
        brute_force(1, 500, [&](int n) { return margin_met_by_table(m, n, k.level, k.side, k.margin); });
    PlanRequest q = request(k.method, k.level, 0.0, 1.0, 1, 500);
    q.side = k.side;
    q.requirements = {{Requirement::max_margin, k.margin}};
    const auto r = engine::plan_sample_size(q, 2);
    INFO(k.method << " " << methods::side_name(k.side));
    REQUIRE(first <= 500);
    CHECK(r.first.n == first);
    CHECK(r.stable.n == stable);
    CHECK(r.first.max_margin <= k.margin);
  }
}

TEST_CASE("plans do not depend on the thread count", "[engine][plan]") {
  std::vector<PlanRequest> qs;
  qs.push_back(request("jeffreys", 0.95, 0.05, 0.95, 1, 700));
  qs.back().requirements = {{Requirement::min_coverage, 0.935}, {Requirement::max_width, 0.15}};
  qs.push_back(request("wilson", 0.9, 0.05, 0.95, 1, 600));
  qs.back().requirements = {{Requirement::mean_coverage, 0.9}, {Requirement::max_margin, 0.05}};
  qs.push_back(request("clopper-pearson", 0.99, 0.0, 1.0, 1, 300));
  qs.back().requirements = {{Requirement::max_margin, 0.1}};
  for (const auto& q : qs) {
    const auto one = engine::plan_sample_size(q, 1);
    const auto two = engine::plan_sample_size(q, 2);
    INFO(q.method.label);
    REQUIRE(one.found);
    CHECK(one.found == two.found);
    CHECK(one.stable_found == two.stable_found);
    CHECK(one.evaluated == two.evaluated);
    // Every figure, bit for bit.
    for (auto pair : {std::pair{one.first, two.first}, std::pair{one.stable, two.stable}}) {
      CHECK(pair.first.n == pair.second.n);
      CHECK(pair.first.inf_coverage == pair.second.inf_coverage);
      CHECK(pair.first.inf_coverage_p == pair.second.inf_coverage_p);
      CHECK(pair.first.mean_coverage == pair.second.mean_coverage);
      CHECK(pair.first.max_width == pair.second.max_width);
      CHECK(pair.first.max_margin == pair.second.max_margin);
    }
  }
}

TEST_CASE("an answer far below nominal coverage is marked", "[engine][plan]") {
  // Margin-only plans over all p: Wald with continuity correction misses
  // badly next to p = 0 and 1 (coverage about 0.39 at its answer); Wilson over
  // p in [0.05, 0.95] stays within 0.01 of nominal at its answer.
  PlanRequest q = request("wald-cc", 0.95, 0.0, 1.0, 1, 2000);
  q.requirements = {{Requirement::max_margin, 0.03}};
  auto r = engine::plan_sample_size(q, 2);
  REQUIRE(r.found);
  CHECK(r.first.inf_coverage < 0.5);
  CHECK(engine::coverage_far_below(r.first, 0.95));
  q = request("wilson", 0.95, 0.05, 0.95, 1, 2000);
  q.requirements = {{Requirement::max_margin, 0.03}};
  r = engine::plan_sample_size(q, 2);
  REQUIRE(r.found);
  CHECK(r.first.inf_coverage >= 0.94);
  CHECK_FALSE(engine::coverage_far_below(r.first, 0.95));
  // The depth is a fifth of alpha, judged by the shared rule.
  CHECK(engine::coverage_warning_depth(0.95) == Approx(0.01));
  engine::PlanFigures f;
  f.inf_coverage = 0.94 - 5e-11;  // within the shared slack of 0.94
  CHECK_FALSE(engine::coverage_far_below(f, 0.95));
  f.inf_coverage = 0.9399;
  CHECK(engine::coverage_far_below(f, 0.95));
}

TEST_CASE("the search reports its progress after each block", "[engine][plan]") {
  PlanRequest q = request("wilson", 0.95, 0.05, 0.95, 1, 700);
  q.requirements = {{Requirement::min_coverage, 0.94}};
  std::vector<engine::PlanProgress> seen;
  const auto r = engine::plan_sample_size(q, 2, [&](const engine::PlanProgress& p) { seen.push_back(p); });
  REQUIRE(seen.size() >= 2);
  CHECK(seen.front().downward);
  CHECK(seen.front().n < 700);
  // Blocks of the upward scan may hold only n the downward scan decided.
  for (std::size_t i = 1; i < seen.size(); ++i) CHECK(seen[i].evaluated >= seen[i - 1].evaluated);
  CHECK(seen[1].evaluated > seen[0].evaluated);
  CHECK(seen.back().evaluated == r.evaluated);
}

TEST_CASE("Clopper-Pearson coverage plans at or below the level need no computation", "[engine][plan]") {
  // Clopper & Pearson (1934): coverage >= level at every n and p, each side.
  // The proof against the exact infimum and mean at every n (brute force).
  for (auto side : {methods::Side::two_sided, methods::Side::lower_bound}) {
    PlanRequest q = request("clopper-pearson", 0.9, 0.03, 0.8, 1, 150);
    q.side = side;
    q.requirements = {{Requirement::min_coverage, 0.9}, {Requirement::mean_coverage, 0.9}};
    CHECK(engine::coverage_guaranteed(q));
    const auto m = methods::make_instance("clopper-pearson", {});
    const auto [first, stable] = brute_force(1, 150, [&](int n) {
      const auto t = engine::build_table(*m.method, n, 0.9, side);
      return engine::meets_coverage(engine::coverage_infimum(t, 0.03, 0.8).value, 0.9) &&
             engine::meets_coverage(engine::coverage_uniform_mean(t, 0.03, 0.8), 0.9);
    });
    const auto r = engine::plan_sample_size(q, 2);
    CHECK(first == 1);
    CHECK(stable == 1);
    CHECK(r.first.n == 1);
    CHECK(r.stable.n == 1);
    CHECK(r.first.inf_coverage >= 0.9 - 1e-10);  // the printed figures are computed
  }
  // Not above the level, not with a width, not for another method.
  PlanRequest q = request("clopper-pearson", 0.9, 0.03, 0.8, 1, 150);
  q.requirements = {{Requirement::min_coverage, 0.91}};
  CHECK_FALSE(engine::coverage_guaranteed(q));
  q.requirements = {{Requirement::min_coverage, 0.85}, {Requirement::max_width, 0.3}};
  CHECK_FALSE(engine::coverage_guaranteed(q));
  q = request("jeffreys", 0.9, 0.03, 0.8, 1, 150);
  q.requirements = {{Requirement::min_coverage, 0.85}};
  CHECK_FALSE(engine::coverage_guaranteed(q));
}
