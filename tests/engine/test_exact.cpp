// Exact evaluation: the pmf window, cell metrics against an independent
// enumeration, and proven properties of coverage.
#include "covergrid/engine/binomial_window.hpp"
#include "covergrid/engine/exact.hpp"
#include "covergrid/engine/interval_table.hpp"
#include "covergrid/methods/numerics.hpp"
#include "covergrid/methods/registry.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <cstring>
#include <limits>
#include <vector>

namespace e = covergrid::engine;
namespace m = covergrid::methods;

namespace {

/// Binomial pmf in long double from lgamma: an independent path (only used
/// where n is small enough for lgamma's cancellation not to matter).
long double pmf_lgamma(int x, int n, long double p) {
  if (p <= 0) return x == 0;
  if (p >= 1) return x == n;
  return std::exp(std::lgamma(n + 1.0L) - std::lgamma(x + 1.0L) - std::lgamma(n - x + 1.0L) +
                  x * std::log(p) + (n - x) * std::log1p(-p));
}

/// Coverage computed with no table, no window: limits straight from the
/// method, pmf from lgamma in long double.
double independent_coverage(const m::IntervalMethod& method, int n, double level, m::Side side, double p) {
  long double sum = 0;
  for (int x = 0; x <= n; ++x) {
    const auto lim = m::interval(method, x, n, level, side);
    if (lim.lower <= p && p <= lim.upper) sum += pmf_lgamma(x, n, p);
  }
  return static_cast<double>(sum);
}

}  // namespace

TEST_CASE("the pmf window holds all but 1e-15 of the mass and matches the pmf", "[engine][window]") {
  e::BinomialWindow w;
  for (int n : {1, 2, 10, 137, 1000, 100000})
    for (double p : {1e-7, 1e-3, 0.01, 0.3, 0.5, 0.77, 0.999, 1 - 1e-9}) {
      w.fill(n, p);
      INFO("n = " << n << ", p = " << p << ", window " << w.lo << ".." << w.hi);
      long double mass = 0;
      double worst = 0;
      for (int x = w.lo; x <= w.hi; ++x) {
        const double term = w.w[static_cast<std::size_t>(x - w.lo)];
        mass += term;
        const double ref = m::binomial_pmf(x, n, p);
        if (ref > 1e-300) worst = std::max(worst, std::fabs(term - ref) / ref);
      }
      // The mass left outside, computed independently from the incomplete
      // beta function, is within the stated bound (2 x 2.5e-16, with a margin
      // for the 1e-14-relative accuracy of ibeta at these tails).
      const double outside = m::binomial_cdf(w.lo - 1, n, p) + m::binomial_sf(w.hi, n, p);
      CHECK(outside <= 5e-16 * (1 + 1e-6) + 1e-30);
      // The terms themselves sum to 1 within their accumulated rounding.
      CHECK(std::fabs(1.0L - mass) <= 1e-13L);
      CHECK(worst < 1e-11);
      // The window grows like sqrt(n p q), not like n.
      if (n == 100000 && p == 0.5) CHECK(w.hi - w.lo < 4000);
    }
  w.fill(50, 0.0);
  CHECK((w.lo == 0 && w.hi == 0 && w.w[0] == 1.0));
  w.fill(50, 1.0);
  CHECK((w.lo == 50 && w.hi == 50 && w.w[0] == 1.0));
}

TEST_CASE("exact metrics agree with an independent enumeration", "[engine][exact]") {
  e::BinomialWindow w;
  for (const auto& entry : m::registry()) {
    if (!m::takes_defaults(entry)) continue;  // a table needs its file
    const auto inst = m::make_instance(entry.info.id, {});
    for (int n : {1, 6, 25, 80})
      for (m::Side side : {m::Side::two_sided, m::Side::lower_bound, m::Side::upper_bound}) {
        if (!inst.method->supports(side)) continue;
        const auto table = e::build_table(*inst.method, n, 0.9, side);
        for (double p : {0.0, 0.003, 0.05, 0.2, 0.5, 0.61, 0.95, 1.0}) {
          w.fill(n, p);
          const auto metrics = e::exact_metrics(table, w, p);
          const double cov = metrics[e::index(e::Metric::coverage)];
          INFO(entry.info.id << " n=" << n << " p=" << p << " " << m::side_name(side));
          CHECK(cov == Approx(independent_coverage(*inst.method, n, 0.9, side, p)).margin(1e-13));
          CHECK(cov == Approx(e::coverage_by_enumeration(table, p)).margin(1e-14));
          // The three outcomes partition the sample space.
          CHECK(cov + metrics[e::index(e::Metric::miss_low)] + metrics[e::index(e::Metric::miss_high)] ==
                Approx(1.0).margin(1e-13));
          // Width and its spread, by direct enumeration.
          long double ew = 0, ew2 = 0, deg = 0, over = 0;
          for (int x = 0; x <= n; ++x) {
            const auto lim = m::interval(*inst.method, x, n, 0.9, side);
            const long double pr = pmf_lgamma(x, n, p), wd = lim.upper - lim.lower;
            ew += pr * wd;
            ew2 += pr * wd * wd;
            deg += lim.upper == lim.lower ? pr : 0;
            over += (lim.raw_lower < 0 || lim.raw_upper > 1) ? pr : 0;
          }
          CHECK(metrics[e::index(e::Metric::width)] == Approx(static_cast<double>(ew)).margin(1e-13));
          CHECK(metrics[e::index(e::Metric::width_sd)] ==
                Approx(std::sqrt(std::max(0.0L, ew2 - ew * ew))).margin(1e-7));
          CHECK(metrics[e::index(e::Metric::degenerate)] == Approx(static_cast<double>(deg)).margin(1e-13));
          CHECK(metrics[e::index(e::Metric::overshoot)] == Approx(static_cast<double>(over)).margin(1e-13));
        }
      }
  }
}

TEST_CASE("run sums of the binomial equal the incomplete-beta form", "[engine][window]") {
  // P(a <= X <= b) as a sum of terms against 1 - F(a - 1) - S(b) from
  // Boost.Math's incomplete beta (methods::binomial_cdf / binomial_sf), and
  // the tail runs against the tails themselves (relative accuracy there).
  int summed = 0, declined = 0;
  for (int n : {1, 2, 7, 30, 200, 1000, 100000})
    for (double p : {1e-12, 1e-4, 0.003, 0.1, 0.37, 0.5, 0.93, 1 - 1e-9})
      for (double fa : {0.0, 0.2, 0.45, 0.5, 0.8})
        for (double fb : {0.0, 0.3, 0.55, 1.0}) {
          const int a = static_cast<int>(fa * n), b = static_cast<int>(a + fb * (n - a));
          const auto sum = e::binomial_run_sum(a, b, n, p);
          INFO("n = " << n << ", p = " << p << ", run " << a << ".." << b);
          if (!sum) {
            ++declined;
            continue;
          }
          ++summed;
          const double reference = 1.0 - m::binomial_cdf(a - 1, n, p) - m::binomial_sf(b, n, p);
          CHECK(*sum == Approx(reference).margin(2e-15));
          if (b == n && a > 0)
            CHECK(*sum == Approx(m::binomial_sf(a - 1, n, p)).epsilon(1e-12).margin(1e-300));
          if (a == 0 && b < n) CHECK(*sum == Approx(m::binomial_cdf(b, n, p)).epsilon(1e-12).margin(1e-300));
        }
  // Both paths occur: short runs and small n are summed, long ones declined.
  CHECK(summed > 500);
  CHECK(declined > 20);
  CHECK(e::binomial_run_sum(5, 4, 10, 0.3) == 0.0);
  CHECK(e::binomial_run_sum(-3, 20, 10, 0.3) == 1.0);
}

TEST_CASE("the one-pass cell kernel gives exact_metrics' values bit for bit, whatever the order of p",
          "[engine][exact]") {
  // Every method with defaults, at both levels and all sides, so that the
  // groups of one to six tables, monotone or not, and unsupported sides all
  // occur; p ascending (as a row runs), descending and scattered, with
  // repeats and the ends, so the cursors walk both ways and jump.
  for (int n : {1, 9, 57}) {
    std::vector<e::IntervalTable> tables;
    for (const auto& entry : m::registry()) {
      if (!m::takes_defaults(entry)) continue;
      const auto inst = m::make_instance(entry.info.id, {});
      for (m::Side side : {m::Side::two_sided, m::Side::lower_bound, m::Side::upper_bound})
        for (double level : {0.8, 0.99}) tables.push_back(e::build_table(*inst.method, n, level, side));
    }
    std::vector<const e::IntervalTable*> pointers;
    for (const auto& t : tables) pointers.push_back(&t);
    std::vector<double> ps;
    for (int i = 0; i <= 40; ++i) ps.push_back(i / 40.0);
    for (int i = 40; i >= 0; --i) ps.push_back(i / 40.0);
    for (double p : {0.5, 0.01, 0.99, 0.3, 0.3, 0.0, 1.0, 0.77}) ps.push_back(p);
    for (std::size_t count : {pointers.size(), std::size_t{1}, std::size_t{5}, std::size_t{7}}) {
      std::vector<e::RunCursor> cursors(count);
      std::vector<e::CellMetrics> out(count);
      e::BinomialWindow w;
      for (double p : ps) {
        w.fill(n, p);
        e::exact_metrics_cell(pointers.data(), count, w, p, cursors.data(), out.data());
        for (std::size_t c = 0; c < count; ++c) {
          const auto one = e::exact_metrics(*pointers[c], w, p);
          INFO("n = " << n << ", p = " << p << ", table " << c << " of " << count);
          // Bit for bit, NaN included.
          CHECK(std::memcmp(one.data(), out[c].data(), sizeof one) == 0);
        }
      }
    }
  }
}

TEST_CASE("Clopper-Pearson coverage is at least nominal on a dense grid", "[engine][property]") {
  // Proven property (Clopper & Pearson 1934): each one-sided bound has
  // coverage >= 1 - a for every n and p; two-sided >= 1 - alpha.
  const auto cp = m::make_instance("clopper-pearson", {});
  e::BinomialWindow w;
  double worst = 1;
  for (m::Side side : {m::Side::two_sided, m::Side::lower_bound, m::Side::upper_bound})
    for (int n = 1; n <= 100; ++n) {
      const auto table = e::build_table(*cp.method, n, 0.95, side);
      for (int k = 1; k < 2000; ++k) {
        const double p = k / 2000.0;
        w.fill(n, p);
        worst = std::min(worst, e::exact_metrics(table, w, p)[0]);
      }
    }
  INFO("smallest coverage found: " << worst);
  CHECK(worst >= 0.95 - 1e-12);
  CHECK(worst < 0.952);  // and the grid does come close to nominal, so the check has teeth
}

TEST_CASE("symmetric methods have coverage(p) = coverage(1 - p)", "[engine][property]") {
  e::BinomialWindow w;
  for (const auto& entry : m::registry()) {
    if (!m::takes_defaults(entry)) continue;  // a table needs its file
    const auto inst = m::make_instance(entry.info.id, {});
    REQUIRE(inst.method->symmetric());
    for (int n : {5, 17, 40}) {
      const auto table = e::build_table(*inst.method, n, 0.95, m::Side::two_sided);
      for (int k = 1; k < 1024; k += 7) {
        const double p = k / 1024.0;  // exactly representable, and so is 1 - p
        w.fill(n, p);
        const double a = e::exact_metrics(table, w, p)[0];
        w.fill(n, 1 - p);
        const double b = e::exact_metrics(table, w, 1 - p)[0];
        INFO(entry.info.id << " n=" << n << " p=" << p);
        CHECK(a == Approx(b).margin(1e-12));
      }
    }
  }
  // An asymmetric prior breaks the symmetry (so the check can fail).
  const auto asym = m::make_instance("bayes-hpd", {{"a", 3.0}, {"b", 1.0}});
  const auto table = e::build_table(*asym.method, 10, 0.95, m::Side::two_sided);
  double largest = 0;
  for (int k = 1; k < 1024; k += 7) {
    const double p = k / 1024.0;
    largest = std::max(
        largest, std::fabs(e::coverage_by_enumeration(table, p) - e::coverage_by_enumeration(table, 1 - p)));
  }
  CHECK(largest > 0.01);
}

TEST_CASE("the continuous infimum is below every grid value and attained in the limit", "[engine][infimum]") {
  for (const auto& entry : m::registry()) {
    if (!m::takes_defaults(entry)) continue;  // a table needs its file
    const auto inst = m::make_instance(entry.info.id, {});
    for (int n : {3, 11, 47, 120})
      for (auto range : {std::pair{0.0, 1.0}, std::pair{0.02, 0.4}, std::pair{0.3, 0.3}}) {
        const auto table = e::build_table(*inst.method, n, 0.95, m::Side::two_sided);
        const auto inf = e::coverage_infimum(table, range.first, range.second);
        INFO(entry.info.id << " n=" << n << " range [" << range.first << ", " << range.second << "] inf "
                           << inf.value << " at " << inf.where << " from " << inf.from);
        REQUIRE(std::isfinite(inf.value));
        CHECK(inf.where >= range.first);
        CHECK(inf.where <= range.second);
        // Below every point of a dense grid over the range.
        double grid_min = 2;
        for (int k = 0; k <= 4000; ++k) {
          const double p = range.first + (range.second - range.first) * k / 4000.0;
          grid_min = std::min(grid_min, e::coverage_by_enumeration(table, p));
        }
        CHECK(inf.value <= grid_min + 1e-12);
        // Approached from the stated side: coverage just beside `where` is
        // within the change a 1e-10 step can make (|dC/dp| < 10 n).
        if (inf.from != 0) {
          const double p = inf.where + inf.from * 1e-10;
          CHECK(std::fabs(e::coverage_by_enumeration(table, p) - inf.value) <= 1e-9 * 10 * n + 1e-12);
        } else {
          CHECK(e::coverage_by_enumeration(table, inf.where) == Approx(inf.value).margin(1e-12));
        }
      }
  }
}

TEST_CASE("the exact uniform mean matches numerical integration", "[engine][mean]") {
  for (const char* id : {"wald", "wilson", "clopper-pearson", "jeffreys"}) {
    const auto inst = m::make_instance(id, {});
    for (int n : {4, 30}) {
      const auto table = e::build_table(*inst.method, n, 0.9, m::Side::two_sided);
      const double lo = 0.05, hi = 0.8;
      const double exact = e::coverage_uniform_mean(table, lo, hi);
      // Midpoint rule on 2e5 points: coverage jumps at about 2(n+1) points,
      // each costing at most one cell width (3.75e-6) times the jump, so the
      // rule is accurate to well below 1e-4.
      const int k = 200000;
      double sum = 0;
      for (int i = 0; i < k; ++i) sum += e::coverage_by_enumeration(table, lo + (hi - lo) * (i + 0.5) / k);
      INFO(id << " n=" << n);
      CHECK(exact == Approx(sum / k).margin(1e-4));
    }
  }
}
