// Exact metrics at extreme inputs (issue 11, items 11 and 12): coverage,
// miss_low and miss_high partition the probability (sum 1 within 1e-12) for
// every method at levels down to 0.001 (Blaker's reversed limits once summed
// to 1.998); a subnormal p behaves like any tiny p (as p = 0 where the
// interval at x = 0 is not [0, 0]); a numerical failure while a
// table is built names x, n, level and side.
// Sources: the partition is a proven property (the three events are
// disjoint and exhaustive for every closed interval); 1e-12 is our own
// rounding bound for a sum of at most a few hundred pmf terms; p = 1e-300
// puts P(X >= 1) <= n * 1e-300 (a proven bound), so 1e-15 leaves only Boost's
// pmf rounding (Boost.Math 1.74, Debian 12).
#include "covergrid/engine/audit.hpp"
#include "covergrid/engine/binomial_window.hpp"
#include "covergrid/engine/exact.hpp"
#include "covergrid/engine/interval_table.hpp"
#include "covergrid/engine/plan.hpp"
#include "covergrid/engine/run.hpp"
#include "covergrid/engine/sample_size.hpp"
#include "covergrid/methods/numerics.hpp"
#include "covergrid/methods/registry.hpp"

#include "support.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <limits>
#include <memory>
#include <string>

namespace e = covergrid::engine;
namespace m = covergrid::methods;
using covergrid::test::FailsAtSeven;

namespace {

double metric(const e::CellMetrics& c, e::Metric which) { return c[static_cast<std::size_t>(which)]; }

}  // namespace

TEST_CASE("coverage + miss_low + miss_high = 1 for every method, level 0.001 included",
          "[engine][exact][extreme]") {
  for (const auto& entry : m::registry()) {
    if (!m::takes_defaults(entry)) continue;  // a table needs its file
    const auto inst = m::make_instance(entry.info.id, {});
    for (m::Side side : {m::Side::two_sided, m::Side::lower_bound, m::Side::upper_bound}) {
      if (!inst.method->supports(side)) continue;
      for (int n : {1, 40, 1000})
        for (double level : {0.001, 0.5, 0.95, 0.99999}) {
          const auto table = e::build_table(*inst.method, n, level, side);
          for (double p : {0.0, 1e-9, 0.03, 0.5, 0.77, 1.0}) {
            e::BinomialWindow w;
            w.fill(n, p);
            const auto c = e::exact_metrics(table, w, p);
            INFO(entry.info.id << " " << m::side_name(side) << " n=" << n << " level=" << level
                               << " p=" << p);
            const double sum = metric(c, e::Metric::coverage) + metric(c, e::Metric::miss_low) +
                               metric(c, e::Metric::miss_high);
            CHECK(std::fabs(sum - 1.0) <= 1e-12);
            CHECK(metric(c, e::Metric::width) >= 0.0);
          }
        }
    }
  }
}

TEST_CASE("a subnormal p behaves like a tiny normal p for every method", "[engine][exact][extreme]") {
  const double tiny = std::numeric_limits<double>::denorm_min();  // 4.9e-324
  CHECK(m::binomial_pmf(0, 1000, tiny) == 1.0);
  CHECK(m::binomial_pmf(2, 1000, tiny) == 0.0);
  CHECK(m::binomial_cdf(0, 1000, tiny) == 1.0);
  CHECK(m::binomial_sf(1, 1000, tiny) == 0.0);
  for (const auto& entry : m::registry()) {
    if (!m::takes_defaults(entry)) continue;  // a table needs its file
    const auto inst = m::make_instance(entry.info.id, {});
    for (int n : {1, 25, 1000}) {
      const auto table = e::build_table(*inst.method, n, 0.95, m::Side::two_sided);
      if (!table.supported) continue;
      e::BinomialWindow w0, wt;
      w0.fill(n, 1e-300);
      wt.fill(n, tiny);
      const auto c0 = e::exact_metrics(table, w0, 1e-300);
      const auto ct = e::exact_metrics(table, wt, tiny);
      INFO(entry.info.id << " n=" << n);
      // Both put all the mass at x = 0 (P(X >= 1) <= 1e-294), and no limit
      // lies between the two p, so the cells agree up to the rounding of
      // Boost's pmf at 1e-300 (an ulp of 1).
      CHECK(metric(ct, e::Metric::coverage) == Approx(metric(c0, e::Metric::coverage)).margin(1e-15));
      CHECK(metric(ct, e::Metric::width) == Approx(metric(c0, e::Metric::width)).margin(1e-15));
      CHECK(std::isfinite(metric(ct, e::Metric::width_sd)));
    }
  }
}

TEST_CASE("a numerical failure in a table names x, n, level and side", "[engine][extreme]") {
  const FailsAtSeven method;
  try {
    (void)e::build_table(method, 12, 0.9, m::Side::lower_bound);
    FAIL("no exception");
  } catch (const m::NumericalError& err) {
    const std::string what = err.what();
    CHECK(what.find("x = 7, n = 12, level = 0.9, side = lower-bound") != std::string::npos);
    CHECK(what.find("Overflow Error") != std::string::npos);
  }
}

TEST_CASE("a numerical failure inside a run names the method, x, n, level and side", "[engine][extreme]") {
  auto s = covergrid::test::scenario_from(R"(
[grid]
n = [5, 12]
p = [0.2, 0.5]
levels = [0.9]
sides = ["lower-bound"]
[[method]]
id = "wilson"
)");
  // The second method fails at x = 7, which only n = 12 reaches.
  m::MethodInstance failing = s.methods.front();
  failing.label = "fails-at-seven";
  failing.method = std::make_shared<FailsAtSeven>();
  s.methods.push_back(failing);
  const auto plan = e::make_plan(s);
  covergrid::test::MemorySink sink(s, plan);
  try {
    e::run_scenario(s, sink);
    FAIL("no exception");
  } catch (const m::NumericalError& err) {
    const std::string what = err.what();
    CHECK(what.find("method 'fails-at-seven': numerical failure at x = 7, n = 12, level = 0.9, side = "
                    "lower-bound") != std::string::npos);
  }
  CHECK_FALSE(sink.finished);
}

TEST_CASE("a numerical failure in an audit or a plan names the method, x, n, level and side",
          "[engine][extreme]") {
  m::MethodInstance failing = m::make_instance("wilson", {});
  failing.label = "fails-at-seven";
  failing.method = std::make_shared<FailsAtSeven>();
  const std::string expected =
      "method 'fails-at-seven': numerical failure at x = 7, n = 12, level = 0.9, side = lower-bound";
  e::Claim c;
  c.method = failing;
  c.level = 0.9;
  c.side = m::Side::lower_bound;
  c.n = {5, 12};
  c.p_lo = 0.1;
  c.p_hi = 0.9;
  for (std::uint64_t replicates : {std::uint64_t{0}, std::uint64_t{100}}) {
    c.replicates = replicates;
    try {
      (void)e::audit_claim(c, 1);
      FAIL("no exception");
    } catch (const m::NumericalError& err) {
      CHECK(std::string(err.what()).find(expected) != std::string::npos);
    }
  }
  e::PlanRequest q;
  q.method = failing;
  q.level = 0.9;
  q.side = m::Side::lower_bound;
  q.p_lo = 0.1;
  q.p_hi = 0.9;
  q.n_from = 12;
  q.n_to = 12;
  q.requirements = {{e::Requirement::min_coverage, 0.85}};
  try {
    (void)e::plan_sample_size(q, 1);
    FAIL("no exception");
  } catch (const m::NumericalError& err) {
    CHECK(std::string(err.what()).find(expected) != std::string::npos);
  }
}
