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
#include "covergrid/output/svg.hpp"

#include <fmt/format.h>

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
  // The report compares the models: the same method's worst and mean
  // coverage under each, the worst being the cube's smallest inf_coverage.
  REQUIRE(call({"report", dir.file("m.h5")}).status == 0);
  const std::string html = covergrid::test::slurp(dir.path() / "m-report.html");
  CHECK(html.find("<section id=\"models\">") != std::string::npos);
  CHECK(html.find("hypergeometric(N=120): worst %") != std::string::npos);
  const double worst =
      std::min(inf[cube.summary_index(1, 0, 0, 0, 0)], inf[cube.summary_index(1, 0, 0, 0, 1)]);
  const auto panel = html.substr(html.find("<section id=\"models\">"));
  CHECK(panel.find(fmt::format("data-value=\"{}\"", o::svg::exact(worst))) != std::string::npos);
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

TEST_CASE("audit and plan take a sampling model and agree with the cube's figures", "[cli][model]") {
  ScratchDir dir("models-audit");
  std::ofstream(dir.path() / "m.toml") << two_models;
  REQUIRE(call({"run", dir.file("m.toml"), "--quiet"}).status == 0);
  const o::CubeReader cube(dir.file("m.h5"));
  const auto inf = cube.summary("inf_coverage");
  // The audit's worst case over n = 8 and 40 is the cube's smallest
  // inf_coverage of the same method, model, side and p range.
  for (std::size_t m = 0; m < 3; ++m) {
    const auto r = call({"audit", "--method", cube.methods[m], "--level", "0.95", "--n", "8,40", "--p",
                         "0.025:0.975", "--model", "hypergeometric:population=120", "--format", "csv"});
    INFO(cube.methods[m] << ": " << r.err);
    REQUIRE((r.status == 0 || r.status == 3));
    const auto lines = split_lines(r.out);
    REQUIRE(lines.size() == 2);
    const auto header = covergrid::test::split_csv_line(lines[0]);
    const auto row = covergrid::test::split_csv_line(lines[1]);
    auto field = [&](const std::string& name) {
      const auto at = std::find(header.begin(), header.end(), name);
      REQUIRE(at != header.end());
      return row[static_cast<std::size_t>(at - header.begin())];
    };
    CHECK(field("model") == "hypergeometric(N=120)");
    const double expected =
        std::min(inf[cube.summary_index(1, 0, 0, m, 0)], inf[cube.summary_index(1, 0, 0, m, 1)]);
    CHECK(std::stod(field("worst_coverage")) == Approx(expected).margin(1e-12));
    CHECK(r.status == (covergrid::engine::meets_coverage(expected, 0.95) ? 0 : 3));
  }
  // A sample larger than the population, a misspelt parameter, an unknown
  // kind: exit 2, one line naming the option.
  for (const auto& spec : {"hypergeometric:population=30", "hypergeometric:populaton=120", "poisson"}) {
    const auto r = call(
        {"audit", "--method", "wald", "--level", "0.95", "--n", "8,40", "--p", "0.1:0.9", "--model", spec});
    INFO(spec << ": " << r.err);
    CHECK(r.status == 2);
    CHECK(r.err.find("--model") != std::string::npos);
    CHECK(std::count(r.err.begin(), r.err.end(), '\n') == 1);
  }
  // A claims file names the model as a table.
  std::ofstream(dir.path() / "c.toml") << R"(
[[claim]]
name = "lot bound"
method = "exact-hypergeometric"
model = { kind = "hypergeometric", population = 120 }
level = 0.95
n = [8, 40]
p = { from = 0.025, to = 0.975 }
[[claim]]
name = "too large a sample"
method = "wald"
model = { kind = "hypergeometric", population = 20 }
level = 0.95
n = [8, 40]
p = 0.5
)";
  const auto bad = call({"audit", "--claims", dir.file("c.toml")});
  CHECK(bad.status == 2);
  CHECK(bad.err.find("c.toml:12") != std::string::npos);
  CHECK(bad.err.find("n = 40 is larger than the population N = 20") != std::string::npos);
  // Plan under the model: the header says which; a search range past N is refused.
  const auto plan = call({"plan", "--method", "exact-hypergeometric", "--level", "0.95", "--max-width", "0.3",
                          "--p", "0.05:0.5", "--n", "1:100", "--model", "hypergeometric:population=120"});
  CHECK(plan.status == 0);
  CHECK(plan.out.find("hypergeometric(N=120) model") != std::string::npos);
  const auto past = call({"plan", "--method", "wald", "--level", "0.95", "--max-width", "0.3", "--p",
                          "0.05:0.5", "--n", "1:200", "--model", "hypergeometric:population=120"});
  CHECK(past.status == 2);
  CHECK(past.err.find("--model") != std::string::npos);
}

TEST_CASE("intervals under a finite population binds the design-aware methods", "[cli][model]") {
  // 10 of 30 drawn from 57: the exact hypergeometric limits are K = 13 and 26
  // (tests/data/reference_finite_population.csv, exact rational arithmetic).
  const auto r = call({"intervals", "10", "30", "--model", "hypergeometric:population=57", "--method",
                       "exact-hypergeometric", "--method", "fpc-wald", "--method", "wald", "--csv"});
  INFO(r.err);
  REQUIRE(r.status == 0);
  const auto lines = split_lines(r.out);
  REQUIRE(lines.size() == 4);
  const auto exact = split_csv_line(lines[1]);
  CHECK(std::stod(exact[5]) == 13.0 / 57);
  CHECK(std::stod(exact[6]) == 26.0 / 57);
  // The corrected Wald interval is narrower than Wald's by sqrt((N - n)/(N - 1)).
  const auto fpc = split_csv_line(lines[2]), wald = split_csv_line(lines[3]);
  const double ratio = (std::stod(fpc[6]) - std::stod(fpc[5])) / (std::stod(wald[6]) - std::stod(wald[5]));
  CHECK(ratio == Approx(std::sqrt(27.0 / 56)).epsilon(1e-12));
  CHECK(call({"intervals", "10", "30"}).out.find("drawn under") == std::string::npos);
  CHECK(call({"intervals", "10", "30", "--model", "hypergeometric:population=57"})
            .out.find("drawn under hypergeometric(N=57)") != std::string::npos);
  const auto big = call({"intervals", "10", "60", "--model", "hypergeometric:population=57"});
  CHECK(big.status == 2);
  CHECK(big.err.find("--model") != std::string::npos);
}

TEST_CASE("audit and plan under a clustered model", "[cli][model]") {
  // Clusters of 10 at icc = 0.1: Clopper-Pearson's 95 % claim over n = 20..60
  // (multiples of 10) fails; an n that is not a multiple is refused, and plan
  // (which searches every n) refuses the model.
  const auto r = call({"audit", "--method", "clopper-pearson", "--level", "0.95", "--n", "20:60:10", "--p",
                       "0.05:0.5", "--model", "beta-binomial:cluster_size=10,icc=0.1", "--format", "csv"});
  INFO(r.err);
  CHECK(r.status == 3);
  CHECK(r.out.find("beta-binomial(k=10,icc=0.1)") != std::string::npos);
  const auto odd = call({"audit", "--method", "wilson", "--level", "0.95", "--n", "25", "--p", "0.1:0.9",
                         "--model", "beta-binomial:cluster_size=10,icc=0.1"});
  CHECK(odd.status == 2);
  CHECK(odd.err.find("not a multiple of the cluster size k = 10") != std::string::npos);
  const auto plan = call({"plan", "--method", "wilson", "--level", "0.95", "--max-width", "0.3", "--p",
                          "0.05:0.5", "--n", "10:100", "--model", "beta-binomial:cluster_size=10,icc=0.1"});
  CHECK(plan.status == 2);
  CHECK(plan.err.find("plan searches each") != std::string::npos);
}
