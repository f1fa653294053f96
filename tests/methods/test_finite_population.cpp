// fpc-wald, fpc-wilson and exact-hypergeometric: limits against the reference
// table tests/data/reference_finite_population.csv, written by
// scripts/gen-reference-finite-population (exact rational arithmetic for the
// hypergeometric limits, cross-checked with scipy.stats.hypergeom; mpmath for
// the closed forms, cross-checked with SciPy; versions in the file's header).
// Also: each method reduces to its infinite-population form under the
// binomial model's design (no population).
#include "covergrid/methods/interval.hpp"
#include "covergrid/methods/registry.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <fstream>
#include <map>
#include <sstream>
#include <string>
#include <vector>

namespace m = covergrid::methods;

namespace {

struct Row {
  std::string method;
  double population = 0;
  int n = 0, x = 0;
  double level = 0;
  m::Side side{};
  double lower = 0, upper = 0;
  bool near_tie = false;
};

std::vector<Row> rows() {
  std::vector<Row> out;
  std::ifstream in(std::string(COVERGRID_TEST_DATA) + "/reference_finite_population.csv");
  REQUIRE(in.good());
  std::string line;
  bool header = false;
  while (std::getline(in, line)) {
    if (line.empty() || line[0] == '#') continue;
    if (!header) {
      header = true;  // method,population,n,x,level,side,lower,upper,k_lower,k_upper,near_tie
      continue;
    }
    std::vector<std::string> f;
    std::stringstream ss(line);
    std::string item;
    while (std::getline(ss, item, ',')) f.push_back(item);
    REQUIRE(f.size() == 11);
    Row r;
    r.method = f[0];
    r.population = std::stod(f[1]);
    r.n = std::stoi(f[2]);
    r.x = std::stoi(f[3]);
    r.level = std::stod(f[4]);
    REQUIRE(m::parse_side(f[5], r.side));
    r.lower = std::stod(f[6]);
    r.upper = std::stod(f[7]);
    r.near_tie = f[10] == "1";
    out.push_back(r);
  }
  return out;
}

}  // namespace

TEST_CASE("finite-population methods match the reference table", "[methods][finite-population]") {
  const auto table = rows();
  REQUIRE(table.size() > 1000);
  std::map<std::string, int> checked;
  for (const auto& r : table) {
    const auto inst = m::make_instance(r.method, {});
    const auto bound = m::under_design(inst.method, {r.population, 1});
    const m::Limits got = m::interval(*bound, r.x, r.n, r.level, r.side);
    INFO(r.method << " N = " << r.population << " n = " << r.n << " x = " << r.x << " level " << r.level
                  << " " << m::side_name(r.side));
    if (r.method == "exact-hypergeometric") {
      // K/N exactly; one K away is allowed only where the deciding tail lies
      // within 1e-9 of the tail probability (near_tie, marked by the script).
      const double slack = r.near_tie ? 1.0 / r.population + 1e-15 : 0.0;
      CHECK(std::fabs(got.raw_lower - r.lower) <= slack);
      CHECK(std::fabs(got.raw_upper - r.upper) <= slack);
    } else {
      CHECK(got.raw_lower == Approx(r.lower).margin(1e-13).epsilon(1e-11));
      CHECK(got.raw_upper == Approx(r.upper).margin(1e-13).epsilon(1e-11));
    }
    ++checked[r.method];
  }
  CHECK(checked["exact-hypergeometric"] > 1000);
  CHECK(checked["fpc-wald"] > 1000);
  CHECK(checked["fpc-wilson"] > 1000);
}

TEST_CASE("finite-population methods take their infinite-population forms without a population",
          "[methods][finite-population]") {
  const std::vector<std::pair<std::string, std::string>> pairs = {
      {"fpc-wald", "wald"}, {"fpc-wilson", "wilson"}, {"exact-hypergeometric", "clopper-pearson"}};
  for (const auto& [fpc, plain] : pairs) {
    const auto a = m::under_design(m::make_instance(fpc, {}).method, {});
    const auto b = m::make_instance(plain, {});
    for (int n : {1, 7, 40})
      for (int x = 0; x <= n; ++x)
        for (auto side : {m::Side::two_sided, m::Side::lower_bound, m::Side::upper_bound}) {
          INFO(fpc << " n = " << n << " x = " << x);
          const auto la = m::interval(*a, x, n, 0.95, side), lb = m::interval(*b.method, x, n, 0.95, side);
          CHECK(la.raw_lower == lb.raw_lower);
          CHECK(la.raw_upper == lb.raw_upper);
        }
  }
}

TEST_CASE("a census gives the point estimate; the correction narrows the interval",
          "[methods][finite-population]") {
  for (const char* id : {"fpc-wald", "fpc-wilson"}) {
    const auto base = m::make_instance(id, {}).method;
    const auto census = m::under_design(base, {50, 1});
    const auto wide = m::under_design(base, {1e6, 1});
    const auto narrow = m::under_design(base, {100, 1});
    for (int x : {0, 7, 25, 50}) {
      INFO(id << " x = " << x);
      const auto c = m::interval(*census, x, 50, 0.95, m::Side::two_sided);
      CHECK(c.raw_lower == Approx(x / 50.0).margin(1e-15));
      CHECK(c.raw_upper == Approx(x / 50.0).margin(1e-15));
      const auto w = m::interval(*wide, x, 50, 0.95, m::Side::two_sided);
      const auto s = m::interval(*narrow, x, 50, 0.95, m::Side::two_sided);
      CHECK(s.upper - s.lower <= w.upper - w.lower);
    }
  }
  // The exact interval at a census is the population's own count, K = x N / n.
  const auto exact = m::under_design(m::make_instance("exact-hypergeometric", {}).method, {40, 1});
  for (int x : {0, 3, 40}) {
    const auto c = m::interval(*exact, x, 40, 0.95, m::Side::two_sided);
    CHECK(c.lower == x / 40.0);
    CHECK(c.upper == x / 40.0);
  }
}
