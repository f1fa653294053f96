// Audit verdicts on claims whose truth is known independently of the engine's
// sweep: a proven property (Clopper-Pearson), a refuted claim whose worst case
// is confirmed by direct enumeration written here, the flip of the verdict at
// the infimum, the exact measure of the region below against a dense grid,
// and simulated verdicts (holds, refuted, inconclusive) with a fixed seed.
#include "covergrid/engine/audit.hpp"
#include "covergrid/engine/error.hpp"
#include "covergrid/engine/exact.hpp"
#include "covergrid/engine/interval_table.hpp"
#include "covergrid/methods/registry.hpp"

#include <boost/math/distributions/binomial.hpp>
#include <boost/math/distributions/normal.hpp>
#include <catch2/catch.hpp>

#include <cmath>
#include <numeric>

using namespace covergrid;
using engine::Claim;
using engine::ClaimKind;
using engine::Outcome;

namespace {

Claim claim(const std::string& method, double level, int n_lo, int n_hi, double p_lo, double p_hi,
            double tolerance = 0) {
  Claim c;
  c.name = method;
  c.method = methods::make_instance(method, {});
  c.level = level;
  c.n.resize(static_cast<std::size_t>(n_hi - n_lo + 1));
  std::iota(c.n.begin(), c.n.end(), n_lo);
  c.p_lo = p_lo;
  c.p_hi = p_hi;
  c.tolerance = tolerance;
  return c;
}

/// Wald coverage at p by direct enumeration, written out here with Boost's
/// normal quantile and binomial pmf (Boost.Math 1.74, Debian 12), independent
/// of the method registry, the interval tables and the sweep.
double wald_coverage(int n, double p, double level) {
  const double z = boost::math::quantile(boost::math::complement(boost::math::normal(), (1 - level) / 2));
  const boost::math::binomial_distribution<double> bin(n, p);
  double cov = 0;
  for (int x = 0; x <= n; ++x) {
    const double ph = static_cast<double>(x) / n;
    const double h = z * std::sqrt(ph * (1 - ph) / n);
    if (std::max(0.0, ph - h) <= p && p <= std::min(1.0, ph + h)) cov += boost::math::pdf(bin, x);
  }
  return cov;
}

}  // namespace

TEST_CASE("Clopper-Pearson at 95 % holds for every n and p", "[engine][audit]") {
  // Proven property: the Clopper-Pearson interval's coverage is at least
  // nominal for every n and p (Clopper and Pearson, Biometrika 26, 1934).
  for (auto side : {methods::Side::two_sided, methods::Side::lower_bound, methods::Side::upper_bound}) {
    Claim c = claim("clopper-pearson", 0.95, 1, 120, 0.0, 1.0);
    c.side = side;
    const auto v = engine::audit_claim(c, 1);
    CHECK(v.outcome == Outcome::holds);
    CHECK(v.worst_coverage >= 0.95 - 1e-12);
    // One-sided, the infimum is nominal itself in theory (approached just
    // beyond each upper limit): the verdict must not hang on rounding.
    if (side != methods::Side::two_sided) CHECK(v.worst_coverage == Approx(0.95).margin(1e-12));
    CHECK(v.n_below == 0);
    CHECK(v.share_below == 0.0);
  }
}

TEST_CASE("the 95 % Wald interval's claim of 0.93 minimum coverage is refuted", "[engine][audit]") {
  const Claim c = claim("wald", 0.95, 1, 100, 0.01, 0.99, 0.02);
  const auto v = engine::audit_claim(c, 2);
  REQUIRE(v.outcome == Outcome::refuted);
  CHECK(v.threshold == Approx(0.93));
  CHECK(v.n_below > 0);
  CHECK(v.worst_p >= 0.01);
  CHECK(v.worst_p <= 0.99);
  // The worst case, confirmed by the independent enumeration just beside the
  // worst p on the side it is approached from (2e-12 is past the sweep's
  // 1e-12 merge of endpoints).
  const double q = std::clamp(v.worst_p + v.worst_from * 2e-12, 0.01, 0.99);
  CHECK(wald_coverage(v.worst_n, q, 0.95) == Approx(v.worst_coverage).margin(1e-9));
  // It is an infimum: no p of a dense grid at any n does better than it.
  double grid_min = 1;
  for (int n = 1; n <= 100; ++n)
    for (int i = 0; i <= 2000; ++i)
      grid_min = std::min(grid_min, wald_coverage(n, 0.01 + 0.98 * i / 2000, 0.95));
  CHECK(v.worst_coverage <= grid_min + 1e-12);
  // Misses and coverage at the worst case add up to one.
  CHECK(v.worst_coverage + v.worst_miss_low + v.worst_miss_high == Approx(1.0).margin(1e-12));
}

TEST_CASE("a tolerance at the infimum flips the verdict", "[engine][audit]") {
  // n = 20..40 over [0.1, 0.9]: a Wald infimum well inside (0, 1).
  Claim c = claim("wald", 0.95, 20, 40, 0.1, 0.9);
  const auto first = engine::audit_claim(c, 1);
  REQUIRE(first.outcome == Outcome::refuted);
  const double inf = first.worst_coverage;
  REQUIRE(inf > 0.5);
  // Beyond the decision slack of 1e-10 (engine/exact.hpp) on either side.
  c.tolerance = 0.95 - inf + 1e-9;
  CHECK(engine::audit_claim(c, 1).outcome == Outcome::holds);
  c.tolerance = 0.95 - inf;
  CHECK(engine::audit_claim(c, 1).outcome == Outcome::holds);
  c.tolerance = 0.95 - inf - 1e-9;
  const auto just_below = engine::audit_claim(c, 1);
  CHECK(just_below.outcome == Outcome::refuted);
  CHECK(just_below.n_below == 1);
  CHECK(just_below.worst_n == first.worst_n);
}

TEST_CASE("the region below the threshold is measured exactly", "[engine][audit]") {
  for (const char* id : {"wald", "wilson", "agresti-coull", "blaker"}) {
    const auto m = methods::make_instance(id, {});
    for (int n : {7, 20, 45}) {
      const auto t = engine::build_table(*m.method, n, 0.95, methods::Side::two_sided);
      const double lo = 0.02, hi = 0.98, threshold = 0.94;
      const auto below = engine::coverage_measure_below(t, lo, hi, threshold);
      // A 200,001-point grid by direct summation: its share below converges to
      // the measure at a rate set by the grid step (4.9e-6) times the number
      // of crossings (at most a few per interval endpoint), so 2e-3 bounds it.
      const int points = 200001;
      int count = 0;
      for (int i = 0; i < points; ++i)
        if (engine::coverage_by_enumeration(t, lo + (hi - lo) * i / (points - 1)) < threshold) ++count;
      INFO(id << " n = " << n);
      CHECK(below.measure / (hi - lo) == Approx(static_cast<double>(count) / points).margin(2e-3));
    }
  }
}

TEST_CASE("a mean claim uses the exact mean over the p range", "[engine][audit]") {
  Claim c = claim("wald", 0.95, 30, 40, 0.1, 0.9);
  c.kind = ClaimKind::mean;
  const auto v = engine::audit_claim(c, 1);
  // The mean of coverage over p, by the trapezoidal rule on 20,001 points of
  // direct summation, agrees with the exact incomplete-beta mean to 1e-6.
  REQUIRE(v.worst_coverage < 0.95);
  const auto m = methods::make_instance("wald", {});
  const auto t = engine::build_table(*m.method, v.worst_n, 0.95, methods::Side::two_sided);
  double sum = 0;
  const int points = 20001;
  for (int i = 0; i < points; ++i) {
    const double w = (i == 0 || i == points - 1) ? 0.5 : 1.0;
    sum += w * engine::coverage_by_enumeration(t, 0.1 + 0.8 * i / (points - 1));
  }
  CHECK(v.worst_coverage == Approx(sum / (points - 1)).margin(1e-6));
  CHECK(v.worst_coverage + v.worst_miss_low + v.worst_miss_high == Approx(1.0).margin(1e-12));
  c.tolerance = 0.95 - v.worst_coverage - 1e-9;
  CHECK(engine::audit_claim(c, 1).outcome == Outcome::refuted);
  c.tolerance = 0.95 - v.worst_coverage + 1e-9;
  CHECK(engine::audit_claim(c, 1).outcome == Outcome::holds);
}

TEST_CASE("simulated claims decide with simultaneous bounds or say inconclusive", "[engine][audit][mc]") {
  // Fixed seeds: each verdict below is deterministic, and each would change
  // if the sampler, the bounds or the correction were wrong.
  SECTION("refuted: Wald far below its threshold") {
    Claim c = claim("wald", 0.95, 30, 34, 0.05, 0.5, 0.02);
    c.replicates = 4000;
    c.p_points = 21;
    c.seed = 11;
    const auto v = engine::audit_claim(c, 2);
    CHECK(v.simulated);
    CHECK(v.outcome == Outcome::refuted);
    CHECK(v.upper_bound < 0.93);
    CHECK(v.cells == 5 * 21);
    CHECK(v.correction.find("Bonferroni over 105 cells") != std::string::npos);
  }
  SECTION("holds: Wilson with a wide tolerance, and every bound holds the exact coverage") {
    Claim c = claim("wilson", 0.95, 50, 54, 0.2, 0.8, 0.05);
    c.replicates = 20000;
    c.p_points = 11;
    c.seed = 12;
    const auto v = engine::audit_claim(c, 2);
    CHECK(v.outcome == Outcome::holds);
    CHECK(v.lower_bound >= 0.90);
    // The exact verdict agrees.
    c.replicates = 0;
    CHECK(engine::audit_claim(c, 2).outcome == Outcome::holds);
  }
  SECTION("inconclusive: the threshold at a cell's exact coverage") {
    // Threshold = the exact coverage of Wilson at n = 40, p = 0.3 (one cell):
    // no finite number of replicates separates them with certainty, and the
    // bound straddles it.
    const auto m = methods::make_instance("wilson", {});
    const auto t = engine::build_table(*m.method, 40, 0.95, methods::Side::two_sided);
    const double exact = engine::coverage_by_enumeration(t, 0.3);
    Claim c = claim("wilson", 0.95, 40, 40, 0.3, 0.3, 0.95 - exact);
    c.replicates = 5000;
    c.seed = 13;
    const auto v = engine::audit_claim(c, 1);
    CHECK(v.outcome == Outcome::inconclusive);
    CHECK(v.lower_bound < v.threshold);
    CHECK(v.upper_bound >= v.threshold);
    CHECK((v.replicates_to_decide == 0 || v.replicates_to_decide > 5000));
  }
  SECTION("inconclusive, then decided with the replicates it names") {
    // Threshold 0.012 below the exact coverage of the cell: 400 replicates
    // cannot tell; the number the verdict names (times 1.5 for the noise of
    // the new estimate) does.
    const auto m = methods::make_instance("wilson", {});
    const auto t = engine::build_table(*m.method, 40, 0.95, methods::Side::two_sided);
    const double exact = engine::coverage_by_enumeration(t, 0.3);
    Claim c = claim("wilson", 0.95, 40, 40, 0.3, 0.3, 0.95 - exact + 0.012);
    c.replicates = 400;
    c.seed = 14;
    const auto v = engine::audit_claim(c, 1);
    REQUIRE(v.outcome == Outcome::inconclusive);
    REQUIRE(v.replicates_to_decide > 400);
    c.replicates = v.replicates_to_decide * 3 / 2;
    CHECK(engine::audit_claim(c, 1).outcome == Outcome::holds);
  }
}

TEST_CASE("a claim on a side the method does not define is bad input", "[engine][audit][bad-input]") {
  Claim c = claim("blaker", 0.95, 10, 12, 0.1, 0.9);
  c.side = methods::Side::lower_bound;
  CHECK_THROWS_AS(engine::audit_claim(c, 1), covergrid::InputError);
}
