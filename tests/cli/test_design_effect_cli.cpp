// Design-effect methods end to end: a clustered scenario run by Monte Carlo
// (their exact cells NaN, their simulated ones filled, the tables ranking
// them as simulated only), the same cube bytes from one thread and two,
// audit refusing an exact audit and judging a simulated one, and
// `intervals --clusters` computing their limits from the cluster counts.
// The scenarios and counts are invented test data: no number here is a
// reference value.
#include "support.hpp"

#include "cli_call.hpp"
#include "covergrid/output/cube.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <fstream>

using covergrid::test::call;
namespace o = covergrid::output;
using namespace covergrid::test;

namespace {

const char* clustered = R"(
title = "classrooms of a district"
seed = 4411
[grid]
n = [40, 80]
p = [0.1, 0.3, 0.5]
levels = 0.9
[evaluate]
replicates = 3000
[[method]]
id = "wilson"
[[method]]
id = "deff-jeffreys"
[[model]]
kind = "binomial"
[[model]]
kind = "beta-binomial"
cluster_size = 10
icc = 0.1
[output]
cube = "c.h5"
tables = "c"
)";

}  // namespace

TEST_CASE("a clustered scenario evaluates design-effect methods by simulation only", "[cli][design-effect]") {
  ScratchDir dir("deff-run");
  std::ofstream(dir.path() / "c.toml") << clustered;
  const auto r = call({"run", dir.file("c.toml"), "--quiet", "--threads", "1"});
  REQUIRE(r.status == 0);
  const o::CubeReader cube(dir.file("c.h5"));
  REQUIRE(cube.models.size() == 2);
  REQUIRE(cube.methods.size() == 2);
  for (std::size_t ni = 0; ni < cube.n.size(); ++ni) {
    // Under the binomial model deff-jeffreys is an x-only method: exact cells.
    for (double v : cube.exact_row("coverage", 0, 0, 0, 1, ni)) CHECK_FALSE(std::isnan(v));
    // Under the clustered model: NaN exact cells, simulated ones filled.
    for (double v : cube.exact_row("coverage", 1, 0, 0, 1, ni)) CHECK(std::isnan(v));
    for (double v : cube.mc_row("coverage", 1, 0, 0, 1, ni)) {
      CHECK(v > 0.5);
      CHECK(v <= 1.0);
    }
    for (double v : cube.exact_row("coverage", 1, 0, 0, 0, ni)) CHECK_FALSE(std::isnan(v));
  }
  const std::string ranking = slurp(dir.path() / "c-ranking.csv");
  CHECK(ranking.find("beta-binomial(k=10,icc=0.1),two-sided,0.9,2,\"deff-jeffreys\"") != std::string::npos);
  CHECK(ranking.find(",simulated\n") != std::string::npos);
  const std::string summary = slurp(dir.path() / "c-summary.csv");
  CHECK(summary.find("beta-binomial(k=10,icc=0.1),two-sided,0.9,\"deff-jeffreys\",40,") != std::string::npos);
  CHECK(r.out.find("simulated only") != std::string::npos);

  // The cluster draws depend on the cell, not on the thread that drew them.
  std::ofstream(dir.path() / "c2.toml") << std::string(clustered).replace(
      std::string(clustered).find("cube = \"c.h5\""), 13, "cube = \"d.h5\"");
  REQUIRE(call({"run", dir.file("c2.toml"), "--quiet", "--threads", "2"}).status == 0);
  const o::CubeReader again(dir.file("d.h5"));
  for (std::size_t ni = 0; ni < cube.n.size(); ++ni)
    CHECK(again.mc_row("coverage", 1, 0, 0, 1, ni) == cube.mc_row("coverage", 1, 0, 0, 1, ni));

  // The report names them apart from methods lacking a side.
  REQUIRE(call({"report", dir.file("c.h5"), "-o", dir.file("c.html")}).status == 0);
  CHECK(slurp(dir.path() / "c.html").find("Simulated only: deff-jeffreys needs each cluster") !=
        std::string::npos);
}

TEST_CASE("audit judges a design-effect method in clusters by simulation only", "[cli][design-effect]") {
  const auto exact =
      call({"audit", "--method", "deff-wilson", "--model", "beta-binomial:cluster_size=10,icc=0.1", "--level",
            "0.95", "--n", "40", "--p", "0.2:0.4"});
  CHECK(exact.status == 2);
  CHECK(exact.err.find("--method deff-wilson: deff-wilson needs each cluster's count") != std::string::npos);
  const auto simulated =
      call({"audit", "--method", "deff-wilson", "--model", "beta-binomial:cluster_size=10,icc=0.1", "--level",
            "0.95", "--n", "40", "--p", "0.2:0.4", "--replicates", "2000", "--p-points", "3"});
  INFO(simulated.out << simulated.err);
  CHECK((simulated.status == 0 || simulated.status == 3));
  CHECK(simulated.out.find("beta-binomial(k=10,icc=0.1)") != std::string::npos);
}

TEST_CASE("intervals --clusters gives the design-effect limits from the cluster counts",
          "[cli][design-effect]") {
  const auto with = call({"intervals", "7", "40", "--clusters", "0,1,3,3", "--method", "deff-clopper-pearson",
                          "--method", "clopper-pearson", "--csv"});
  REQUIRE(with.status == 0);
  const auto lines = split_lines(with.out);
  REQUIRE(lines.size() >= 3);
  const auto deff = split_csv_line(lines[1]), plain = split_csv_line(lines[2]);
  REQUIRE(deff[0] == "deff-clopper-pearson");
  REQUIRE(plain[0] == "clopper-pearson");
  // Clusters 0, 1, 3, 3 of 10 vary more than independent draws: wider limits.
  CHECK(std::stod(deff[6]) - std::stod(deff[5]) > std::stod(plain[6]) - std::stod(plain[5]));

  const auto without = call({"intervals", "7", "40", "--model", "beta-binomial:cluster_size=10,icc=0.1"});
  REQUIRE(without.status == 0);
  CHECK(without.out.find("needs each cluster's count: give --clusters") != std::string::npos);
  const auto text = call({"intervals", "7", "40", "--clusters", "0,1,3,3"});
  REQUIRE(text.status == 0);
  CHECK(text.out.find("in 4 clusters of 10") != std::string::npos);

  for (const auto& [clusters, says] :
       std::vector<std::pair<std::string, std::string>>{{"0,1,3", "3 clusters cannot share N = 40 equally"},
                                                        {"0,1,3,4", "the counts sum to 8, not to X = 7"},
                                                        {"0,0,0,9,0", "more than its 8 units"},
                                                        {"1,x,3,3", "\"x\" is not a count"},
                                                        {"1,,3,3", "\"\" is not a count"}}) {
    const auto bad = call({"intervals", "7", "40", "--clusters", clusters});
    INFO(clusters << ": " << bad.err);
    CHECK(bad.status == 2);
    CHECK(bad.err.find("--clusters") != std::string::npos);
    CHECK(bad.err.find(says) != std::string::npos);
  }
  const auto mismatch = call(
      {"intervals", "7", "40", "--clusters", "0,1,3,3", "--model", "beta-binomial:cluster_size=20,icc=0.1"});
  CHECK(mismatch.status == 2);
  CHECK(mismatch.err.find("do not match the model") != std::string::npos);
}
