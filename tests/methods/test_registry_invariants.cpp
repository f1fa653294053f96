// Invariants over the whole registry (proven properties of the definitions):
// 0 <= L <= U <= 1; clipped = clamp(raw); nesting in the level; x <-> n - x
// symmetry for symmetric methods; one-sided bounds equal the two-sided limits
// at twice the tail for equal-tailed methods; metadata well-formed.
#include "covergrid/methods/interval.hpp"
#include "covergrid/methods/numerics.hpp"
#include "covergrid/methods/registry.hpp"

#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <set>

namespace m = covergrid::methods;

namespace {

std::vector<m::MethodInstance> all_instances() {
  std::vector<m::MethodInstance> out;
  for (const auto& e : m::registry())
    if (m::takes_defaults(e)) out.push_back(m::make_instance(e.info.id, {}));
  out.push_back(m::make_instance("jeffreys", {{"boundary", false}}));
  out.push_back(m::make_instance("bayes-hpd", {{"a", 0.5}, {"b", 0.5}}));
  out.push_back(m::make_instance("logit", {{"boundary", std::string("add-half")}}));
  return out;
}

std::vector<int> xs_for(int n) {
  if (n <= 60) {
    std::vector<int> v(static_cast<std::size_t>(n) + 1);
    for (int x = 0; x <= n; ++x) v[static_cast<std::size_t>(x)] = x;
    return v;
  }
  return {0, 1, 2, 3, n / 7, n / 3, n / 2, n - 3, n - 2, n - 1, n};
}

// Equal-tailed methods: two_sided() is lower/upper at alpha/2.
bool equal_tailed(const std::string& id) { return id != "bayes-hpd" && id != "blaker"; }

}  // namespace

TEST_CASE("registry metadata is well formed", "[methods][registry]") {
  std::set<std::string> ids;
  // Lower-case words joined by single hyphens.
  auto id_shape_ok = [](const std::string& id) {
    if (id.empty() || id.front() == '-' || id.back() == '-' || id.find("--") != std::string::npos)
      return false;
    return std::all_of(id.begin(), id.end(), [](char c) { return (c >= 'a' && c <= 'z') || c == '-'; });
  };
  for (const auto& e : m::registry()) {
    INFO(e.info.id);
    CHECK(id_shape_ok(e.info.id));
    CHECK(ids.insert(e.info.id).second);
    CHECK_FALSE(e.info.name.empty());
    CHECK_FALSE(e.info.reference.empty());
    CHECK_FALSE(e.info.definition.empty());
    CHECK(m::find_method(e.info.id) == &e);
  }
  for (const char* id :
       {"wald", "wilson", "clopper-pearson", "blaker", "fpc-wald", "fpc-wilson", "exact-hypergeometric"})
    CHECK(ids.count(id) == 1);
  CHECK(m::find_method("no-such-method") == nullptr);
}

TEST_CASE("parameters are validated and named", "[methods][registry]") {
  try {
    m::make_instance("wald", {{"boundary", true}});
    FAIL("expected a ParameterError");
  } catch (const m::ParameterError& e) {
    CHECK(e.key() == "boundary");
    CHECK(std::string(e.what()).find("takes no parameter 'boundary'") != std::string::npos);
  }
  CHECK_THROWS_AS(m::make_instance("jeffreys", {{"boundary", 1.0}}), m::ParameterError);
  CHECK_THROWS_AS(m::make_instance("bayes-hpd", {{"a", 0.0}}), m::ParameterError);
  CHECK_THROWS_AS(m::make_instance("bayes-hpd", {{"b", -1.0}}), m::ParameterError);
  CHECK(m::make_instance("bayes-hpd", {{"a", 2.0}}).label == "bayes-hpd(a=2)");
  CHECK(m::make_instance("bayes-hpd", {{"a", 1.0}}).label == "bayes-hpd");
  CHECK(m::make_instance("wilson", {}, "my-label").label == "my-label");
}

TEST_CASE("z values for common levels", "[methods][numerics]") {
  // Common practice: z = 1.645, 1.960, 2.576 for 90, 95, 99 % two-sided (3 decimals).
  CHECK(m::z_upper(0.05) == Approx(1.645).margin(5e-4));
  CHECK(m::z_upper(0.025) == Approx(1.960).margin(5e-4));
  CHECK(m::z_upper(0.005) == Approx(2.576).margin(5e-4));
  // Symmetry of the normal quantile, computed without 1 - t.
  CHECK(m::z_upper(0.975) == Approx(-m::z_upper(0.025)).epsilon(1e-14));
}

TEST_CASE("limits are ordered, clipped from raw, nested and symmetric", "[methods][registry][invariants]") {
  const std::vector<double> levels = {0.5, 0.8, 0.9, 0.95, 0.99, 0.999};
  for (const auto& inst : all_instances()) {
    const std::string& id = inst.entry->info.id;
    for (int n : {1, 2, 3, 4, 7, 13, 30, 60, 250, 5000, 100000}) {
      if (id == "blaker" && n > 5000) continue;  // slow by construction; covered up to 5000
      for (int x : xs_for(n)) {
        for (m::Side side : {m::Side::two_sided, m::Side::lower_bound, m::Side::upper_bound}) {
          if (!inst.method->supports(side)) continue;
          double prev_lo = 2, prev_hi = -1;
          for (double level : levels) {
            const auto lim = m::interval(*inst.method, x, n, level, side);
            INFO(inst.label << " x=" << x << " n=" << n << " level=" << level << " " << m::side_name(side)
                            << " -> [" << lim.lower << ", " << lim.upper << "]");
            REQUIRE(std::isfinite(lim.raw_lower));
            REQUIRE(std::isfinite(lim.raw_upper));
            CHECK(lim.lower == std::clamp(lim.raw_lower, 0.0, 1.0));
            CHECK(lim.upper == std::clamp(lim.raw_upper, 0.0, 1.0));
            CHECK(lim.lower <= lim.upper);
            // Nested: a higher level never gives a narrower interval.
            CHECK(lim.lower <= prev_lo + 1e-12);
            CHECK(lim.upper >= prev_hi - 1e-12);
            prev_lo = lim.lower;
            prev_hi = lim.upper;
            if (side == m::Side::lower_bound) CHECK(lim.upper == 1.0);
            if (side == m::Side::upper_bound) CHECK(lim.lower == 0.0);
            if (inst.method->symmetric() && side == m::Side::two_sided) {
              const auto mirror = m::interval(*inst.method, n - x, n, level, side);
              CHECK(lim.lower == Approx(1 - mirror.upper).margin(1e-12));
            }
            if (equal_tailed(id) && side == m::Side::lower_bound && level > 0.5) {
              const auto two = m::interval(*inst.method, x, n, 1 - 2 * (1 - level), m::Side::two_sided);
              CHECK(lim.lower == Approx(two.lower).margin(1e-12));
            }
          }
        }
      }
    }
  }
}
