// The hypergeometric model (a finite population): its window against
// Boost.Math's hypergeometric law, the snapping of p to K/N, the worst case
// and means over the attainable points against brute force, the exact
// hypergeometric interval's guarantee, and the approach to the binomial model
// as the population grows.
#include "covergrid/engine/coverage_rule.hpp"
#include "covergrid/engine/exact.hpp"
#include "covergrid/engine/interval_table.hpp"
#include "covergrid/engine/sampling_model.hpp"
#include "covergrid/methods/numerics.hpp"
#include "covergrid/methods/registry.hpp"

#include <boost/math/distributions/hypergeometric.hpp>
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <memory>
#include <vector>

namespace e = covergrid::engine;
namespace m = covergrid::methods;

namespace {

std::shared_ptr<const e::SamplingModel> finite_model(double population) {
  const auto* entry = e::find_model("hypergeometric");
  REQUIRE(entry != nullptr);
  return entry->make(
      m::resolve_param_list("model 'hypergeometric'", entry->params, {{"population", population}}));
}

e::IntervalTable table_under(const std::string& id, const e::SamplingModel& model, int n, double level,
                             m::Side side = m::Side::two_sided) {
  const auto method = m::under_design(m::make_instance(id, {}).method, model.design());
  return e::build_table(*method, n, level, side, id);
}

/// Coverage at K/N by direct summation of Boost's pmf over x = 0..n.
double brute_coverage(const e::IntervalTable& t, std::int64_t k, std::int64_t big_n) {
  const double p = static_cast<double>(k) / static_cast<double>(big_n);
  double c = 0;
  for (int x = 0; x <= t.n; ++x)
    if (t.lower[static_cast<std::size_t>(x)] <= p && p <= t.upper[static_cast<std::size_t>(x)])
      c += m::hypergeometric_pmf(x, t.n, k, big_n);
  return c;
}

/// The independent reference: Boost.Math's hypergeometric distribution
/// (Debian 12's Boost 1.74; exact prime factorisation up to N of about 10^5,
/// Lanczos approximations beyond), which covergrid does not use itself.
double boost_pmf(int x, int n, std::int64_t k, std::int64_t big_n) {
  const auto lo = std::max<std::int64_t>(0, n - (big_n - k)), hi = std::min<std::int64_t>(n, k);
  if (x < lo || x > hi) return 0.0;
  boost::math::hypergeometric_distribution<double> law(static_cast<unsigned>(k), static_cast<unsigned>(n),
                                                       static_cast<unsigned>(big_n));
  return boost::math::pdf(law, static_cast<unsigned>(x));
}

}  // namespace

TEST_CASE("the hypergeometric probabilities equal Boost.Math's", "[engine][model]") {
  for (std::int64_t big_n : {7, 400, 5000, 123457, 1000000})
    for (int n : {1, 6, 50, 300})
      for (std::int64_t k : {std::int64_t{0}, std::int64_t{1}, big_n / 3, big_n / 2, big_n - 1, big_n}) {
        if (n > big_n) continue;
        INFO("N = " << big_n << " n = " << n << " K = " << k);
        std::vector<double> ref(static_cast<std::size_t>(n) + 1);
        for (int x = 0; x <= n; ++x) ref[static_cast<std::size_t>(x)] = boost_pmf(x, n, k, big_n);
        for (int x = 0; x <= n; ++x) {
          CHECK(m::hypergeometric_pmf(x, n, k, big_n) ==
                Approx(ref[static_cast<std::size_t>(x)]).epsilon(1e-12).margin(1e-300));
          // Each tail against the direct sum of the reference probabilities.
          double below = 0, above = 0;
          for (int j = 0; j <= n; ++j) (j <= x ? below : above) += ref[static_cast<std::size_t>(j)];
          CHECK(m::hypergeometric_cdf(x, n, k, big_n) == Approx(below).epsilon(1e-11).margin(1e-15));
          CHECK(m::hypergeometric_sf(x, n, k, big_n) == Approx(above).epsilon(1e-11).margin(1e-15));
        }
      }
}

TEST_CASE("the hypergeometric model is registered, labelled and checks its population", "[engine][model]") {
  const auto model = finite_model(5000);
  CHECK(model->kind() == "hypergeometric");
  CHECK(model->label() == "hypergeometric(N=5000)");
  CHECK(model->design().population == 5000);
  CHECK(model->lattice() == 5000);
  CHECK(model->refuses(5000).empty());
  CHECK(model->refuses(5001).find("larger than the population") != std::string::npos);
  CHECK(model->attainable(0.12345) == 617.0 / 5000);  // K = round(617.25)
  CHECK(model->attainable(0.0) == 0.0);
  CHECK(model->attainable(1.0) == 1.0);
  const auto* entry = e::find_model("hypergeometric");
  CHECK_THROWS_AS(entry->make(m::resolve_param_list("m", entry->params, {})), m::ParameterError);
  CHECK_THROWS_AS(entry->make(m::resolve_param_list("m", entry->params, {{"population", 10.5}})),
                  m::ParameterError);
  CHECK_THROWS_AS(m::resolve_param_list("m", entry->params, {{"population", 0.0}}), m::ParameterError);
}

TEST_CASE("the hypergeometric window equals the pmf and keeps all but 1e-15", "[engine][model]") {
  for (double big_n : {12.0, 400.0, 1e6})
    for (int n : {1, 5, 12, 300}) {
      if (n > big_n) continue;
      const auto model = finite_model(big_n);
      for (double p : {0.0, 0.004, 0.25, 0.5, 0.93, 1.0}) {
        e::ProbabilityWindow w;
        model->window(n, p, w);
        const auto k = static_cast<std::int64_t>(std::nearbyint(model->attainable(p) * big_n));
        INFO("N = " << big_n << " n = " << n << " K = " << k);
        CHECK(w.cum.back() == Approx(1.0).margin(1e-14));
        double outside = 0;
        for (int x = 0; x <= n; ++x) {
          const double exact = boost_pmf(x, n, k, static_cast<std::int64_t>(big_n));
          if (x < w.lo || x > w.hi) {
            outside += exact;
            continue;
          }
          CHECK(w.w[static_cast<std::size_t>(x - w.lo)] == Approx(exact).epsilon(1e-12).margin(1e-300));
        }
        CHECK(outside <= w.tail_bound);
      }
    }
}

TEST_CASE("hypergeometric run probabilities are unimodal in K (checked exhaustively)", "[engine][model]") {
  const std::int64_t big_n = 40;
  const int n = 9;
  for (int a = 0; a <= n; ++a)
    for (int b = a; b <= n; ++b) {
      int turns = 0;
      double last = -1, slope = 1;
      for (std::int64_t k = 0; k <= big_n; ++k) {
        double v = 0;
        for (int x = a; x <= b; ++x) v += m::hypergeometric_pmf(x, n, k, big_n);
        if (last >= 0 && std::fabs(v - last) > 1e-14) {
          const double s = v > last ? 1 : -1;
          if (s != slope) ++turns;
          slope = s;
        }
        last = v;
      }
      INFO("run " << a << ".." << b);
      CHECK(turns <= 1);  // rises, then falls (or only one of the two)
    }
}

TEST_CASE("worst case and means over a finite population's points equal brute force", "[engine][model]") {
  const std::int64_t big_n = 150;
  const auto model = finite_model(static_cast<double>(big_n));
  for (const char* id : {"wald", "wilson", "clopper-pearson", "fpc-wilson", "exact-hypergeometric", "blaker"})
    for (int n : {3, 17, 60})
      for (auto range : {std::pair{0.0, 1.0}, std::pair{0.1, 0.33}}) {
        const auto t = table_under(id, *model, n, 0.95);
        double worst = 2, sum = 0, low = 0, high = 0;
        std::int64_t points = 0;
        double worst_p = -1;
        for (std::int64_t k = 0; k <= big_n; ++k) {
          const double p = static_cast<double>(k) / static_cast<double>(big_n);
          if (p < range.first || p > range.second) continue;
          const double c = brute_coverage(t, k, big_n);
          if (c < worst) worst = c, worst_p = p;
          sum += c;
          for (int x = 0; x <= n; ++x) {
            const double w = m::hypergeometric_pmf(x, n, k, big_n);
            if (t.upper[static_cast<std::size_t>(x)] < p) low += w;
            if (t.lower[static_cast<std::size_t>(x)] > p) high += w;
          }
          ++points;
        }
        INFO(id << " n = " << n << " range " << range.first << ".." << range.second);
        const auto inf = e::coverage_infimum(t, range.first, range.second, -HUGE_VAL, *model);
        CHECK(inf.value == Approx(worst).margin(1e-12));
        CHECK(brute_coverage(t, static_cast<std::int64_t>(std::nearbyint(inf.where * big_n)), big_n) ==
              Approx(inf.value).margin(1e-12));
        CHECK(inf.from == 0);
        CHECK_FALSE(inf.refined);
        (void)worst_p;
        CHECK(e::coverage_uniform_mean(t, range.first, range.second, *model) ==
              Approx(sum / static_cast<double>(points)).margin(1e-12));
        const auto miss = e::miss_uniform_means(t, range.first, range.second, *model);
        CHECK(miss[0] == Approx(low / static_cast<double>(points)).margin(1e-12));
        CHECK(miss[1] == Approx(high / static_cast<double>(points)).margin(1e-12));
      }
}

TEST_CASE("the exact hypergeometric interval covers at least nominal at every attainable p",
          "[engine][model][guarantee]") {
  // Proven in methods/src/exact_hypergeometric.cpp; checked at every K.
  for (double big_n : {20.0, 61.0, 300.0})
    for (int n : {1, 2, 5, 13, 20}) {
      const auto model = finite_model(big_n);
      for (double level : {0.9, 0.95})
        for (auto side : {m::Side::two_sided, m::Side::lower_bound, m::Side::upper_bound}) {
          const auto t = table_under("exact-hypergeometric", *model, n, level, side);
          const auto inf = e::coverage_infimum(t, 0.0, 1.0, -HUGE_VAL, *model);
          INFO("N = " << big_n << " n = " << n << " level " << level << " " << m::side_name(side) << " worst "
                      << inf.value << " at " << inf.where);
          CHECK(e::meets_coverage(inf.value, level));
          for (std::int64_t k = 0; k <= static_cast<std::int64_t>(big_n); ++k)
            CHECK(brute_coverage(t, k, static_cast<std::int64_t>(big_n)) >= inf.value - 1e-12);
        }
    }
}

TEST_CASE("a population of 10^6 gives the binomial's coverage within n(n-1)/(2N)", "[engine][model]") {
  // The bound: draw n units with replacement; given that all n are distinct
  // (probability at least 1 - n(n-1)/(2N), a union bound over the pairs) the
  // sample is a uniform n-subset, so X is hypergeometric. Hence the total
  // variation distance between Hypergeometric(N, K, n) and Bin(n, K/N) is at
  // most n(n-1)/(2N), and so is any coverage difference at p = K/N.
  const double big_n = 1e6;
  const auto model = finite_model(big_n);
  for (const char* id : {"wald", "wilson", "clopper-pearson"})
    for (int n : {10, 30, 100}) {
      const auto t = table_under(id, *model, n, 0.95);
      const double bound = n * (n - 1.0) / (2 * big_n);
      double largest = 0;
      for (int k = 1; k < 1000; k += 7) {
        const double p = k / 1000.0;  // attainable: K = 1000 k
        e::ProbabilityWindow wh, wb;
        model->window(n, p, wh);
        e::binomial_model().window(n, p, wb);
        const double ch = e::exact_metrics(t, wh, p)[e::index(e::Metric::coverage)];
        const double cb = e::exact_metrics(t, wb, p)[e::index(e::Metric::coverage)];
        largest = std::max(largest, std::fabs(ch - cb));
      }
      INFO(id << " n = " << n << " largest difference " << largest << " bound " << bound);
      CHECK(largest <= bound);
      CHECK(largest > 0);  // the two laws do differ: the comparison is not vacuous
    }
}
