// Registry-wide invariants at extreme levels (issue 11, item 11): for every
// method, parameter variant and side, over levels from the smallest to the
// largest accepted (covergrid/methods/limits.hpp) and a range of n and x
// (x = 0, x = n, n = 1, n = 1000, n = 100000 at a few x), the limits are
// finite, 0 <= L <= U <= 1 after clipping, and L <= p^ <= U for Blaker, whose
// accepted set always holds p^ = x/n. Blaker once returned L = 0.548 >
// U = 0.452 at x = 500, n = 1000, level 0.001.
#include "covergrid/methods/interval.hpp"
#include "covergrid/methods/limits.hpp"
#include "covergrid/methods/registry.hpp"

#include <catch2/catch.hpp>
#include <fmt/format.h>

#include <cmath>
#include <string>
#include <vector>

namespace m = covergrid::methods;

namespace {

std::vector<m::MethodInstance> instances() {
  std::vector<m::MethodInstance> out;
  for (const auto& e : m::registry())
    if (m::takes_defaults(e)) out.push_back(m::make_instance(e.info.id, {}));
  out.push_back(m::make_instance("jeffreys", {{"boundary", false}}));
  out.push_back(m::make_instance("bayes-hpd", {{"a", 0.5}, {"b", 0.5}}));
  out.push_back(m::make_instance("bayes-hpd", {{"a", 1e6}, {"b", 1e-3}}));
  out.push_back(m::make_instance("logit", {{"boundary", std::string("add-half")}}));
  return out;
}

const std::vector<double> levels = {m::min_level, 1e-3, 0.01, 0.1,   0.3,     1.0 / 3,  0.5,
                                    2.0 / 3,      0.9,  0.95, 0.999, 0.99999, 1 - 1e-9, m::max_level};

struct Case {
  int n;
  std::vector<int> xs;
  std::vector<double> levels;
};

std::vector<Case> cases() {
  std::vector<Case> out;
  for (int n : {1, 2, 5, 17}) {
    std::vector<int> xs;
    for (int x = 0; x <= n; ++x) xs.push_back(x);
    out.push_back({n, xs, levels});
  }
  out.push_back({1000, {0, 1, 2, 37, 500, 501, 998, 999, 1000}, levels});
  // Large n sparingly: Blaker's limits cost milliseconds each there.
  out.push_back({100000, {0, 1, 50000, 99999, 100000}, {1e-3, 0.5, 0.95, 1 - 1e-9}});
  return out;
}

}  // namespace

TEST_CASE("every method's limits are ordered and in [0, 1] from the smallest to the largest level",
          "[methods][registry][extreme]") {
  std::vector<std::string> failures;
  long checked = 0;
  for (const auto& inst : instances())
    for (m::Side side : {m::Side::two_sided, m::Side::lower_bound, m::Side::upper_bound}) {
      if (!inst.method->supports(side)) continue;
      for (const auto& c : cases())
        for (int x : c.xs)
          for (double level : c.levels) {
            auto fail = [&](const std::string& why, double lo, double hi) {
              failures.push_back(fmt::format("{} {} x={} n={} level={}: {} (L={}, U={})", inst.label,
                                             m::side_name(side), x, c.n, level, why, lo, hi));
            };
            ++checked;
            m::Limits lim{};
            try {
              lim = m::interval(*inst.method, x, c.n, level, side);
            } catch (const std::exception& e) {
              fail(std::string("threw: ") + e.what(), 0, 0);
              continue;
            }
            if (!std::isfinite(lim.raw_lower) || !std::isfinite(lim.raw_upper))
              fail("raw limit not finite", lim.raw_lower, lim.raw_upper);
            if (!(lim.lower >= 0 && lim.upper <= 1)) fail("outside [0, 1]", lim.lower, lim.upper);
            if (!(lim.lower <= lim.upper)) fail("lower above upper", lim.lower, lim.upper);
            const double p_hat = static_cast<double>(x) / c.n;
            if (inst.entry->info.id == "blaker" && !(lim.lower <= p_hat && p_hat <= lim.upper))
              fail("p^ outside", lim.lower, lim.upper);
          }
    }
  INFO(checked << " intervals checked, " << failures.size() << " failed");
  for (std::size_t i = 0; i < failures.size() && i < 20; ++i) UNSCOPED_INFO(failures[i]);
  CHECK(failures.empty());
  CHECK(checked > 10000);
}

TEST_CASE("blaker at level 0.001 gives a short interval around p^ (the reported reversal)",
          "[methods][blaker][extreme]") {
  const auto b = m::make_instance("blaker", {});
  const auto lim = m::interval(*b.method, 500, 1000, 0.001, m::Side::two_sided);
  CHECK(lim.lower <= 0.5);
  CHECK(lim.upper >= 0.5);
  // Nested in the level: inside the 50 % interval, which is itself narrow.
  const auto half = m::interval(*b.method, 500, 1000, 0.5, m::Side::two_sided);
  CHECK(lim.lower >= half.lower);
  CHECK(lim.upper <= half.upper);
  CHECK(lim.upper - lim.lower < 0.01);
}
