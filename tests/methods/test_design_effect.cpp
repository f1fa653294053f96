// deff-wilson, deff-clopper-pearson, deff-jeffreys: limits from cluster counts
// against tests/data/reference_design_effect.csv, written by
// scripts/gen-reference-design-effect from the published definitions with
// SciPy (scipy.stats norm and beta) and mpmath (the t quantiles; versions in
// the file's header), which
// computes the between-cluster variance from the counts themselves, not
// from their sum of squares as we do. Also: the edge cases the methods'
// comments state, symmetry, and that they need the cluster counts only
// under a clustered design.
#include "covergrid/methods/interval.hpp"
#include "covergrid/methods/registry.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <fstream>
#include <numeric>
#include <random>
#include <sstream>
#include <stdexcept>
#include <string>
#include <vector>

namespace m = covergrid::methods;

namespace {

m::ClusterCounts counts_of(int k, const std::vector<int>& y) {
  double s = 0;
  for (int v : y) s += static_cast<double>(v) * v;
  return {static_cast<int>(y.size()), k, s};
}

std::shared_ptr<const m::IntervalMethod> bound(const std::string& id, bool df, int k) {
  const auto inst = m::make_instance(id, {{"df_adjusted", df}});
  return m::under_design(inst.method, {0, k});
}

}  // namespace

TEST_CASE("design-effect methods match the SciPy reference table", "[methods][design-effect]") {
  std::ifstream in(std::string(COVERGRID_TEST_DATA) + "/reference_design_effect.csv");
  REQUIRE(in.good());
  std::string line;
  bool header = false;
  int checked = 0;
  while (std::getline(in, line)) {
    if (line.empty() || line[0] == '#') continue;
    if (!header) {
      header = true;  // method,df_adjusted,k,counts,level,side,lower,upper
      continue;
    }
    std::vector<std::string> f;
    std::stringstream ss(line);
    std::string item;
    while (std::getline(ss, item, ',')) f.push_back(item);
    REQUIRE(f.size() == 8);
    const int k = std::stoi(f[2]);
    std::vector<int> y;
    std::stringstream cs(f[3]);
    for (int v; cs >> v;) y.push_back(v);
    const int x = std::accumulate(y.begin(), y.end(), 0);
    m::Side side{};
    REQUIRE(m::parse_side(f[5], side));
    const auto method = bound(f[0], f[1] == "true", k);
    const m::Limits got = m::clustered_interval(*method, x, counts_of(k, y), std::stod(f[4]), side);
    INFO(line);
    // SciPy's beta.ppf and Boost.Math's inverse incomplete beta agree to
    // about 1e-12 relative here (both iterate to double precision).
    CHECK(got.raw_lower == Approx(std::stod(f[6])).epsilon(1e-9).margin(1e-13));
    CHECK(got.raw_upper == Approx(std::stod(f[7])).epsilon(1e-9).margin(1e-13));
    ++checked;
  }
  CHECK(checked == 594);
}

TEST_CASE("design-effect methods: a design effect below one, x = 0 and one cluster take n* = n",
          "[methods][design-effect]") {
  const auto cp = m::make_instance("clopper-pearson", {}).method;
  const auto wilson = m::make_instance("wilson", {}).method;
  // Equal counts in every cluster: no between-cluster variation, n* = n.
  const std::vector<int> equal = {3, 3, 3, 3, 3, 3};
  const auto deff_cp = bound("deff-clopper-pearson", false, 10);
  const auto deff_w = bound("deff-wilson", false, 10);
  for (const auto& [y, k] : std::vector<std::pair<std::vector<int>, int>>{
           {equal, 10}, {{0, 0, 0, 0}, 10}, {{10, 10}, 10}, {{7}, 25}}) {
    const int x = std::accumulate(y.begin(), y.end(), 0), n = static_cast<int>(y.size()) * k;
    INFO("x = " << x << ", n = " << n);
    const auto a = m::clustered_interval(*deff_cp, x, counts_of(k, y), 0.95, m::Side::two_sided);
    const auto b = m::interval(*cp, x, n, 0.95, m::Side::two_sided);
    CHECK(a.lower == Approx(b.lower).margin(1e-15));
    CHECK(a.upper == Approx(b.upper).margin(1e-15));
    const auto c = m::clustered_interval(*deff_w, x, counts_of(k, y), 0.95, m::Side::two_sided);
    const auto d = m::interval(*wilson, x, n, 0.95, m::Side::two_sided);
    CHECK(c.lower == Approx(d.lower).margin(1e-15));
    CHECK(c.upper == Approx(d.upper).margin(1e-15));
  }
  // One cluster: no degrees-of-freedom adjustment either.
  const auto df_cp = bound("deff-clopper-pearson", true, 25);
  const auto one = m::clustered_interval(*df_cp, 7, counts_of(25, {7}), 0.9, m::Side::lower_bound);
  CHECK(one.lower == Approx(m::interval(*cp, 7, 25, 0.9, m::Side::lower_bound).lower).margin(1e-15));
}

TEST_CASE("design-effect methods: clustering widens the interval, the df adjustment widens it more",
          "[methods][design-effect]") {
  // Clusters that differ widely (a design effect well above one).
  const std::vector<int> y = {0, 0, 12, 1, 0, 9, 0, 2, 15, 0};
  const int x = 39, n = 200;
  for (const std::string id : {"deff-wilson", "deff-clopper-pearson", "deff-jeffreys"}) {
    INFO(id);
    const auto plain =
        m::interval(*m::make_instance(id.substr(5), {}).method, x, n, 0.95, m::Side::two_sided);
    const auto no_df =
        m::clustered_interval(*bound(id, false, 20), x, counts_of(20, y), 0.95, m::Side::two_sided);
    const auto df =
        m::clustered_interval(*bound(id, true, 20), x, counts_of(20, y), 0.95, m::Side::two_sided);
    CHECK(no_df.upper - no_df.lower > 1.5 * (plain.upper - plain.lower));
    CHECK(df.upper - df.lower > no_df.upper - no_df.lower);
  }
}

TEST_CASE("design-effect methods are symmetric in successes and failures", "[methods][design-effect]") {
  std::mt19937_64 rng(20261203);  // fixed seed
  for (const std::string id : {"deff-wilson", "deff-clopper-pearson", "deff-jeffreys"}) {
    const auto method = bound(id, true, 6);
    for (int trial = 0; trial < 200; ++trial) {
      std::uniform_int_distribution<int> clusters(1, 12), count(0, 6);
      std::vector<int> y(static_cast<std::size_t>(clusters(rng))), flipped;
      for (int& v : y) v = count(rng);
      for (int v : y) flipped.push_back(6 - v);
      const int x = std::accumulate(y.begin(), y.end(), 0), n = static_cast<int>(y.size()) * 6;
      const auto a = m::clustered_interval(*method, x, counts_of(6, y), 0.9, m::Side::two_sided);
      const auto b = m::clustered_interval(*method, n - x, counts_of(6, flipped), 0.9, m::Side::two_sided);
      INFO(id << " x = " << x << " n = " << n);
      CHECK(a.raw_lower == Approx(1 - b.raw_upper).margin(1e-12));
      CHECK(a.raw_upper == Approx(1 - b.raw_lower).margin(1e-12));
    }
  }
}

TEST_CASE("design-effect methods need the cluster counts only under a clustered design",
          "[methods][design-effect]") {
  for (const std::string id : {"deff-wilson", "deff-clopper-pearson", "deff-jeffreys"}) {
    const auto inst = m::make_instance(id, {});
    INFO(id);
    CHECK_FALSE(inst.method->needs_clusters());
    CHECK_FALSE(m::under_design(inst.method, {5000, 1})->needs_clusters());
    const auto clustered = m::under_design(inst.method, {0, 20});
    CHECK(clustered->needs_clusters());
    CHECK_THROWS_AS(m::interval(*clustered, 3, 40, 0.95, m::Side::two_sided), std::logic_error);
    // Independent draws: n clusters of one unit, n* = n - 1 (Kish's estimate
    // of the variance of a mean of n Bernoulli draws), x* = x (n - 1) / n.
    const auto direct = m::interval(*inst.method, 7, 30, 0.95, m::Side::two_sided);
    const auto as_clusters = m::clustered_interval(*inst.method, 7, {30, 1, 7.0}, 0.95, m::Side::two_sided);
    CHECK(direct.raw_lower == as_clusters.raw_lower);
    CHECK(direct.raw_upper == as_clusters.raw_upper);
  }
  // deff-wilson at cluster size one is Wilson at (x (n-1)/n, n-1), by its definition.
  const auto w = m::interval(*m::make_instance("deff-wilson", {}).method, 7, 30, 0.95, m::Side::two_sided);
  const double ne = 29, xe = 7.0 * 29 / 30, z = 1.959963984540054;  // z_{0.975}, from memory
  const double centre = (xe + z * z / 2) / (ne + z * z);
  const double half =
      z * std::sqrt(ne) / (ne + z * z) * std::sqrt(xe / ne * (1 - xe / ne) + z * z / (4 * ne));
  CHECK(w.raw_lower == Approx(centre - half).epsilon(1e-12));
  CHECK(w.raw_upper == Approx(centre + half).epsilon(1e-12));
}
