// Sampling models end to end: a scenario with a binomial and a
// finite-population (hypergeometric) model, run exactly and by Monte Carlo;
// the cube's /models groups and snapped p; simulated against exact coverage
// within a stated bound (fixed seed); the exact hypergeometric interval's
// guarantee in the cube's summaries; rank's paired differences drawn under
// the cube's own model; shards merging to the single run's bytes. The
// scenarios are invented test grids: no number here is a reference value.
#include "e2e.hpp"
#include "support.hpp"

#include "cli_call.hpp"
#include "covergrid/engine/coverage_rule.hpp"
#include "covergrid/output/cube.hpp"
#include "covergrid/output/hdf5.hpp"
#include "covergrid/output/rank.hpp"

#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <fstream>

using covergrid::test::call;
namespace o = covergrid::output;
using namespace covergrid::test;

namespace {

const char* two_models = R"(
title = "records drawn from a small archive"
seed = 9120
[grid]
n = [8, 40]
p = { from = 0.025, to = 0.975, count = 39 }
levels = 0.95
sides = ["two-sided", "upper-bound"]
[evaluate]
exact = true
replicates = 4000
[[method]]
id = "wald"
[[method]]
id = "fpc-wilson"
[[method]]
id = "exact-hypergeometric"
[[model]]
kind = "binomial"
[[model]]
kind = "hypergeometric"
population = 120
[output]
cube = "m.h5"
tables = "m"
)";

}  // namespace

TEST_CASE("a finite-population model runs exactly and by simulation, and the cube records it",
          "[cli][model]") {
  ScratchDir dir("models-two");
  std::ofstream(dir.path() / "m.toml") << two_models;
  REQUIRE(call({"run", dir.file("m.toml"), "--quiet"}).status == 0);
  const o::CubeReader cube(dir.file("m.h5"));
  REQUIRE(cube.models == std::vector<std::string>{"binomial", "hypergeometric(N=120)"});
  CHECK(cube.model_info.at("hypergeometric(N=120)").at("kind") == "hypergeometric");
  CHECK(cube.model_info.at("hypergeometric(N=120)").at("param.population") == "120");
  {
    o::File f = o::File::open(dir.file("m.h5"), false);
    const auto attained = o::read_doubles(f.id(), "/models/hypergeometric(N=120)/p_attained");
    REQUIRE(attained.size() == cube.p.size());
    for (std::size_t j = 0; j < attained.size(); ++j)
      CHECK(attained[j] == std::nearbyint(cube.p[j] * 120) / 120);
    CHECK_FALSE(o::exists(f.id(), "models/binomial/p_attained"));
  }
  // Simulated against exact coverage, cell by cell: with R = 4000 draws the
  // simulated coverage has standard error sqrt(c(1 - c)/R); a cell more than
  // 5 of them (plus 1/R for the discreteness) away would mean the sampler and
  // the exact sums use different laws (at one fixed seed, so no flakes).
  for (std::size_t mo = 0; mo < 2; ++mo)
    for (std::size_t side = 0; side < 2; ++side)
      for (std::size_t m = 0; m < 3; ++m)
        for (std::size_t ni = 0; ni < 2; ++ni) {
          const auto ex = cube.exact_row("coverage", mo, side, 0, m, ni);
          const auto mc = cube.mc_row("coverage", mo, side, 0, m, ni);
          for (std::size_t j = 0; j < ex.size(); ++j) {
            const double se = std::sqrt(std::max(0.0, ex[j] * (1 - ex[j])) / 4000);
            INFO("model " << mo << " side " << side << " method " << m << " n " << cube.n[ni] << " p "
                          << cube.p[j]);
            CHECK(std::fabs(mc[j] - ex[j]) <= 5 * se + 1.0 / 4000);
          }
        }
  // The exact hypergeometric interval keeps its promise under its model
  // (the worst case over the attainable points of the range).
  const auto inf = cube.summary("inf_coverage");
  for (std::size_t side = 0; side < 2; ++side)
    for (std::size_t ni = 0; ni < 2; ++ni)
      CHECK(covergrid::engine::meets_coverage(inf[cube.summary_index(1, side, 0, 2, ni)], 0.95));
  // Under the finite population the uncorrected Wald interval does not.
  CHECK_FALSE(covergrid::engine::meets_coverage(inf[cube.summary_index(1, 0, 0, 0, 0)], 0.95));
  CHECK(call({"report", dir.file("m.h5")}).status == 0);
}

TEST_CASE("rank's paired differences are drawn under the cube's own model", "[cli][model]") {
  ScratchDir dir("models-rank");
  std::string text = two_models;
  text.replace(text.find("exact = true"), 12, "exact = false");
  std::ofstream(dir.path() / "m.toml") << text;
  REQUIRE(call({"run", dir.file("m.toml"), "--quiet"}).status == 0);
  const o::CubeReader cube(dir.file("m.h5"));
  o::RankOptions opt;
  opt.bands = {{8, 40}};
  const auto groups = o::rank_methods(cube, opt);
  std::size_t checked = 0;
  for (const auto& g : groups) {
    if (g.model != 1) continue;
    for (std::size_t r = 1; r < g.entries.size(); ++r) {
      const auto& e = g.entries[r];
      REQUIRE(e.has_pair);
      // On the run's own draws the paired difference is exactly the
      // difference of the stored simulated coverages.
      double sum = 0;
      for (std::size_t ni = 0; ni < 2; ++ni) {
        const auto a = cube.mc_row("coverage", 1, g.side, 0, e.method, ni);
        const auto b = cube.mc_row("coverage", 1, g.side, 0, g.entries[0].method, ni);
        for (std::size_t j = 0; j < a.size(); ++j) sum += a[j] - b[j];
      }
      CHECK(e.pair_difference == Approx(sum / (2.0 * static_cast<double>(cube.p.size()))).margin(1e-12));
      ++checked;
    }
  }
  CHECK(checked == 4);  // two sides, two pairs each
}

TEST_CASE("a finite-population scenario in two shards merges to the single run's cube", "[cli][model]") {
  ScratchDir single("models-single"), shards("models-shards");
  std::string text = two_models;
  text.replace(text.find("count = 39"), 10, "count = 1500");  // rows split over chunks
  text.replace(text.find("replicates = 4000"), 17, "replicates = 50");
  std::ofstream(single.path() / "m.toml") << text;
  std::ofstream(shards.path() / "m.toml") << text;
  REQUIRE(run(single.path(), {"run", "m.toml", "--quiet"}) == 0);
  REQUIRE(run(shards.path(), {"run", "m.toml", "--quiet", "--shard", "1/2"}) == 0);
  REQUIRE(run(shards.path(), {"run", "m.toml", "--quiet", "--shard", "2/2"}) == 0);
  REQUIRE(run(shards.path(), {"merge", "m.shard-1-of-2.h5", "m.shard-2-of-2.h5", "-o", "m.h5", "--quiet"}) ==
          0);
  same_datasets(single.file("m.h5"), shards.file("m.h5"));
}
