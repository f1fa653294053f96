// Monte Carlo: the generator against known answers, the sampler against the
// binomial pmf, and simulated coverage against exact coverage cell by cell,
// all with fixed seeds and stated bounds (so they cannot flake, and they can
// fail: each bound is shown to reject a deliberately wrong variant).
#include "support.hpp"

#include "covergrid/engine/binomial_window.hpp"
#include "covergrid/engine/monte_carlo.hpp"
#include "covergrid/engine/random.hpp"
#include "covergrid/engine/run.hpp"
#include "covergrid/engine/sampler.hpp"
#include "covergrid/methods/numerics.hpp"

#include <boost/math/distributions/chi_squared.hpp>
#include <boost/math/distributions/normal.hpp>
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <vector>

namespace e = covergrid::engine;
namespace m = covergrid::methods;
using covergrid::test::MemorySink;
using covergrid::test::scenario_from;

TEST_CASE("Philox4x32-10 known answers", "[engine][random]") {
  // Random123's kat_vectors for philox4x32 with 10 rounds (Random123 1.14;
  // from memory: the file is not shipped in Debian's librandom123-dev).
  struct Kat {
    std::uint32_t ctr[4], key[2], out[4];
  } kats[] = {
      {{0, 0, 0, 0}, {0, 0}, {0x6627e8d5, 0xe169c58d, 0xbc57ac4c, 0x9b00dbd8}},
      {{0xffffffff, 0xffffffff, 0xffffffff, 0xffffffff},
       {0xffffffff, 0xffffffff},
       {0x408f276d, 0x41c83b0e, 0xa20bc7c6, 0x6d5451fd}},
      {{0x243f6a88, 0x85a308d3, 0x13198a2e, 0x03707344},
       {0xa4093822, 0x299f31d0},
       {0xd16cfe09, 0x94fdcceb, 0x5001e420, 0x24126ea1}},
  };
  for (const auto& k : kats) {
    std::uint32_t out[4];
    e::philox4x32_10(k.ctr, k.key, out);
    INFO(std::hex << out[0] << " " << out[1] << " " << out[2] << " " << out[3]);
    for (int i = 0; i < 4; ++i) CHECK(out[i] == k.out[i]);
  }
}

TEST_CASE("a cell's uniforms depend only on seed, cell and replicate", "[engine][random]") {
  const e::CellStream a(7, 0, 100, 3), b(7, 0, 100, 4), c(8, 0, 100, 3);
  std::vector<double> u(10), v(10), w(7), x(10);
  a.uniforms(0, 10, u.data());
  a.uniforms(3, 7, w.data());  // an odd start gives the same replicates
  for (int i = 0; i < 7; ++i) CHECK(w[static_cast<std::size_t>(i)] == u[static_cast<std::size_t>(i + 3)]);
  b.uniforms(0, 10, v.data());
  c.uniforms(0, 10, x.data());
  CHECK(u != v);
  CHECK(u != x);
  for (double t : u) CHECK((t >= 0 && t < 1));
}

namespace {

/// Pearson chi-square over bins with expected count >= 5 (tails merged).
struct Gof {
  double stat;
  int df;
};

Gof goodness_of_fit(int n, double p_draw, double p_model, std::size_t draws) {
  e::BinomialWindow w;
  w.fill(n, p_draw);
  e::WindowSampler sampler;
  sampler.build(w);
  const e::CellStream stream(2026, 1, static_cast<std::uint32_t>(n), 9);
  std::vector<double> counts(static_cast<std::size_t>(n) + 1, 0.0), u(draws);
  stream.uniforms(0, draws, u.data());
  for (double t : u) counts[static_cast<std::size_t>(sampler.draw(t))] += 1;
  const double total = static_cast<double>(draws);
  // Bins: consecutive x merged until the expected count reaches 5; the last
  // bin is closed with everything that remains.
  std::vector<std::pair<double, double>> bins;  // (observed, expected)
  double obs = 0, ex = 0;
  for (int x = 0; x <= n; ++x) {
    obs += counts[static_cast<std::size_t>(x)];
    ex += total * m::binomial_pmf(x, n, p_model);
    if (ex >= 5 && total * m::binomial_sf(x, n, p_model) >= 5) {
      bins.emplace_back(obs, ex);
      obs = ex = 0;
    }
  }
  bins.emplace_back(obs, ex);
  double stat = 0;
  for (const auto& [o, x] : bins) stat += (o - x) * (o - x) / x;
  return {stat, static_cast<int>(bins.size()) - 1};
}

}  // namespace

TEST_CASE("the sampler draws the binomial law (chi-square goodness of fit)", "[engine][sampler]") {
  // Critical values: Boost.Math's chi-squared quantile at 1 - 1e-4 for the
  // bins' degrees of freedom; 10^6 draws each, fixed seed.
  const std::size_t draws = 1'000'000;
  struct Case {
    int n;
    double p;
  } cases[] = {{20, 0.3}, {1000, 0.01}, {100, 0.5}, {5, 0.97}, {100000, 0.5}, {3000, 0.0033}};
  for (const auto& c : cases) {
    const Gof g = goodness_of_fit(c.n, c.p, c.p, draws);
    const double critical =
        boost::math::quantile(boost::math::complement(boost::math::chi_squared(g.df), 1e-4));
    INFO("n = " << c.n << ", p = " << c.p << ": chi2 = " << g.stat << " on " << g.df << " df, critical "
                << critical);
    CHECK(g.stat < critical);
  }
  // The test has teeth: draws from p = 0.3 judged against 0.303 are rejected.
  const Gof wrong = goodness_of_fit(20, 0.303, 0.3, draws);
  CHECK(wrong.stat >
        boost::math::quantile(boost::math::complement(boost::math::chi_squared(wrong.df), 1e-4)));
}

TEST_CASE("simulated coverage agrees with exact coverage in every cell", "[engine][mc][slow]") {
  // Every method and variant, three sides, small and large n, p near 0 and 1.
  const auto s = scenario_from(R"(
seed = 424242
[grid]
n = [1, 2, 3, 5, 8, 13, 20, 40, 75, 150, 400, 1000]
p = { from = 0.001, to = 0.999, count = 120, spacing = "logit" }
levels = [0.9]
sides = ["two-sided", "lower-bound", "upper-bound"]
[evaluate]
exact = true
replicates = 4000
[[method]]
id = "wald"
[[method]]
id = "wald-cc"
[[method]]
id = "wald-half"
[[method]]
id = "wilson"
[[method]]
id = "wilson-cc"
[[method]]
id = "agresti-coull"
[[method]]
id = "clopper-pearson"
[[method]]
id = "mid-p"
[[method]]
id = "jeffreys"
[[method]]
id = "bayes-hpd"
a = 0.5
b = 0.5
[[method]]
id = "likelihood-ratio"
[[method]]
id = "arcsine"
[[method]]
id = "logit"
[[method]]
id = "blaker"
)");
  const auto plan = e::make_plan(s);
  MemorySink sink(s, plan);
  e::run_scenario(s, sink);
  const double r = 4000;
  const auto& ex = sink.exact[e::index(e::Metric::coverage)];
  const auto& mc = sink.mc[0];
  // Cells where R c (1 - c) >= 10 are judged by their z-score (the normal
  // approximation to the binomial count, common practice); the others, where
  // a handful of misses is expected, by the exact binomial tail probability
  // of the observed count (Boost via methods::binomial_cdf/sf). Coverage 0 or
  // 1 (within 1e-15) must be reproduced exactly.
  std::size_t cells = 0;
  for (std::size_t i = 0; i < ex.size(); ++i)
    if (!std::isnan(ex[i])) ++cells;
  const double alpha_each = 0.001 / static_cast<double>(cells);  // Bonferroni, family-wise 0.001
  std::vector<double> z;
  std::size_t exact_differ = 0, tail_checked = 0, tail_failed = 0;
  for (std::size_t i = 0; i < ex.size(); ++i) {
    if (std::isnan(ex[i])) continue;  // a side the method does not define
    const double c = std::clamp(ex[i], 0.0, 1.0);
    if (c * (1 - c) < 1e-15) {
      if (std::fabs(mc[i] - std::round(c)) > 1e-12) ++exact_differ;
      continue;
    }
    if (r * c * (1 - c) >= 10) {
      z.push_back((mc[i] - c) / std::sqrt(c * (1 - c) / r));
      continue;
    }
    const int covered = static_cast<int>(std::lround(mc[i] * r));
    const double lower_tail = m::binomial_cdf(covered, 4000, c),
                 upper_tail = m::binomial_sf(covered - 1, 4000, c);
    ++tail_checked;
    if (std::min(lower_tail, upper_tail) < alpha_each / 2) ++tail_failed;
  }
  const double k = static_cast<double>(z.size());
  // Bonferroni over all cells at family-wise error 0.001 (two-sided).
  const double bound = boost::math::quantile(boost::math::complement(boost::math::normal(), alpha_each / 2));
  double worst = 0, mean = 0, sq = 0;
  for (double v : z) {
    worst = std::max(worst, std::fabs(v));
    mean += v;
  }
  mean /= k;
  for (double v : z) sq += (v - mean) * (v - mean);
  const double sd = std::sqrt(sq / (k - 1));
  INFO(z.size() << " z-scores: max |z| " << worst << " (bound " << bound << "), mean " << mean << ", sd "
                << sd << "; " << tail_checked << " low-count cells by exact tails, " << tail_failed
                << " failed; " << exact_differ << " certain cells differ");
  CHECK(z.size() > 10000);
  CHECK(worst <= bound);
  CHECK(std::fabs(mean) <= 0.1);
  CHECK(std::fabs(sd - 1) <= 0.1);
  CHECK(tail_failed == 0);
  CHECK(exact_differ == 0);
  // The bounds have teeth: a standard error 15 % too small fails them (a
  // biased sampler fails the chi-square test above).
  double sq_wrong = 0;
  for (double v : z) sq_wrong += (v / 0.85 - mean / 0.85) * (v / 0.85 - mean / 0.85);
  CHECK(std::fabs(std::sqrt(sq_wrong / (k - 1)) - 1) > 0.1);
  // The MC standard error reported in the cube is the binomial one.
  for (std::size_t i = 0; i < ex.size(); i += 97)
    if (!std::isnan(mc[i])) CHECK(sink.mc[7][i] == Approx(std::sqrt(mc[i] * (1 - mc[i]) / r)).margin(1e-15));
}

TEST_CASE("a target standard error chooses replicates per cell", "[engine][mc]") {
  const auto s = scenario_from(R"(
seed = 99
[grid]
n = [10, 200]
p = [0.001, 0.2, 0.5]
levels = [0.95]
[evaluate]
exact = true
replicates = 1000
target_se = 0.003
max_replicates = 64000
[[method]]
id = "wilson"
[[method]]
id = "wald"
)");
  const auto plan = e::make_plan(s);
  MemorySink sink(s, plan);
  e::run_scenario(s, sink);
  for (std::size_t i = 0; i < sink.mc_replicates.size(); ++i) {
    const double reps = sink.mc_replicates[i];
    INFO("cell " << i << ": " << reps << " replicates");
    CHECK(reps >= 1000);
    CHECK(reps <= 64000);
    // Either the target is met for every method, or the cap was reached.
    bool met = true;
    for (std::size_t c = 0; c < 2; ++c) {
      const std::size_t at = sink.at(c, 0, i / 3) * 3 + i % 3;
      const double cov = sink.mc[0][at];
      const double se =
          std::sqrt(((cov * reps + 1) / (reps + 2)) * (1 - (cov * reps + 1) / (reps + 2)) / reps);
      met = met && se <= 0.003;
    }
    CHECK((met || reps == 64000));
  }
  // p = 0.5 needs about 0.25 / 0.003^2 = 27778 replicates: more than the first round.
  CHECK(*std::max_element(sink.mc_replicates.begin(), sink.mc_replicates.end()) > 1000);
}

TEST_CASE("the batched generator equals Random123's philox4x32 bit for bit", "[engine][random]") {
  const std::uint64_t seed = 0x1234567890abcdefull;
  const e::CellStream stream(seed, 3, 777, 41);
  const std::uint32_t key[2] = {static_cast<std::uint32_t>(seed), static_cast<std::uint32_t>(seed >> 32)};
  for (std::uint64_t block : {0ull, 1ull, 63ull, 64ull, 1000003ull, 0x1ffffffffull}) {
    const std::uint32_t ctr[4] = {static_cast<std::uint32_t>(block), static_cast<std::uint32_t>(block >> 32),
                                  41, (3u << 24) | 777u};
    std::uint32_t want[4];
    e::philox4x32_10(ctr, key, want);
    for (int word = 0; word < 4; ++word) CHECK(stream.raw_word(block, word) == want[word]);
  }
}

TEST_CASE("paired differences re-draw the run's replicates and are more precise than unpaired",
          "[engine][mc]") {
  const auto s = scenario_from(R"(
seed = 5150
[grid]
n = [12, 60]
p = [0.05, 0.2, 0.5]
levels = [0.95]
[evaluate]
replicates = 20000
[[method]]
id = "wilson"
[[method]]
id = "agresti-coull"
)");
  const auto plan = e::make_plan(s);
  MemorySink sink(s, plan);
  e::run_scenario(s, sink);
  double paired_total = 0, unpaired_total = 0;
  for (std::size_t ni = 0; ni < s.n.size(); ++ni)
    for (std::size_t pi = 0; pi < s.p.size(); ++pi) {
      const auto ta = e::build_table(*s.methods[0].method, s.n[ni], 0.95, m::Side::two_sided);
      const auto tb = e::build_table(*s.methods[1].method, s.n[ni], 0.95, m::Side::two_sided);
      const auto c = e::paired_difference(s.seed, 0, s.n[ni], pi, s.p[pi], 20000, ta, tb);
      const double stored_a = sink.mc[0][sink.at(0, 0, ni) * s.p.size() + pi];
      const double stored_b = sink.mc[0][sink.at(1, 0, ni) * s.p.size() + pi];
      CHECK(c.coverage_a == stored_a);  // the very same draws
      CHECK(c.coverage_b == stored_b);
      CHECK(c.difference == Approx(stored_a - stored_b).margin(1e-15));
      paired_total += c.difference_se;
      unpaired_total += std::sqrt(stored_a * (1 - stored_a) / 20000 + stored_b * (1 - stored_b) / 20000);
    }
  // Wilson and Agresti-Coull cover the same x almost always: pairing removes
  // most of the noise (proven: Var(A - B) = Var A + Var B - 2 Cov(A, B)).
  INFO("mean paired se " << paired_total / 6 << ", unpaired " << unpaired_total / 6);
  CHECK(paired_total < 0.5 * unpaired_total);
}
