// The per-n work estimate (audit, plan): driven by a synthetic clock, so the
// fit and the probe schedule are checked exactly, with no wall time involved.
#include "covergrid/engine/estimate.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <numeric>
#include <vector>

namespace e = covergrid::engine;

namespace {

/// A step whose cost is a * n^b seconds on a clock it advances itself.
struct SyntheticWork {
  double a, b, now = 0;
  std::vector<int> called;
  void step(int n) {
    called.push_back(n);
    now += a * std::pow(n, b);
  }
  double truth(const std::vector<int>& ns) const {
    double sum = 0;
    for (int n : ns) sum += a * std::pow(n, b);
    return sum;
  }
};

std::vector<int> range(int from, int to) {
  std::vector<int> ns(static_cast<std::size_t>(to - from + 1));
  std::iota(ns.begin(), ns.end(), from);
  return ns;
}

}  // namespace

TEST_CASE("the per-n estimate fits the growth of a step's cost and sums it over every n",
          "[engine][estimate]") {
  for (double b : {1.0, 1.5, 2.0}) {
    // One second at the range's last n: more than the probes' budget.
    SyntheticWork w{std::pow(1e5, -b), b, 0, {}};
    const auto ns = range(3, 100000);
    const e::WorkEstimate est = e::estimate_per_n(
        ns, 1, [&](int n) { w.step(n); }, 0, [&] { return w.now; });
    INFO("b = " << b);
    CHECK(est.exponent == Approx(b).epsilon(1e-9));
    CHECK(est.seconds == Approx(w.truth(ns)).epsilon(1e-9));
    CHECK(est.threads == 1);
    // The probes stay within their budget: the largest n probed costs at most
    // the half-second budget, and never the whole range's last n when that
    // alone would overrun it.
    CHECK(est.calibration_seconds <= 0.5 + 1e-12);
    CHECK(est.largest_probe < 100000);
    CHECK(est.probes >= 2);
  }
}

TEST_CASE("the per-n estimate probes a small job only briefly and includes extra work",
          "[engine][estimate]") {
  // 10 n at 1 ms each: the first probe is already over 2 % of the job.
  SyntheticWork w{1e-3, 0.0, 0, {}};
  const auto ns = range(10, 19);
  const e::WorkEstimate est = e::estimate_per_n(
      ns, 1, [&](int n) { w.step(n); }, 5.0, [&] { return w.now; });
  CHECK(w.called == std::vector<int>{10});
  CHECK(est.probes == 1);
  CHECK(est.exponent == 1.0);  // one probe: linear growth assumed
  double linear = 0;
  for (int n : ns) linear += 1e-3 * n / 10.0;
  CHECK(est.seconds == Approx(linear + 5.0).epsilon(1e-9));
  // An empty job costs only the extra work.
  CHECK(e::estimate_per_n(
            {}, 1, [](int) {}, 2.0)
            .seconds == 2.0);
}

TEST_CASE("a step shorter than the timer's floor is repeated to time it", "[engine][estimate]") {
  SyntheticWork w{1e-6, 0.0, 0, {}};  // 1 us per call: 200 calls make the 0.2 ms floor
  const std::vector<int> ns = {50};
  const e::WorkEstimate est = e::estimate_per_n(
      ns, 1, [&](int n) { w.step(n); }, 0, [&] { return w.now; });
  CHECK(w.called.size() >= 200);  // 200 sums to 2e-4 up to rounding
  CHECK(w.called.size() <= 201);
  CHECK(est.seconds == Approx(1e-6).epsilon(1e-9));
}

TEST_CASE("the work estimate's fitted cost is what progress weights by", "[engine][estimate]") {
  e::WorkEstimate est;
  est.ref_n = 1000;
  est.seconds_at_ref = 2.0;
  est.exponent = 1.5;
  CHECK(est.cost(1000) == 2.0);
  CHECK(est.cost(4000) == Approx(16.0));
  est.seconds = 3 * 3600.0;
  CHECK(est.large());
}
