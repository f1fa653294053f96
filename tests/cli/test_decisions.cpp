// audit, plan and rank through the command line: verdict exit codes, the
// verdict tables, bad input (exit 2, nothing written).
#include "support.hpp"

#include "cli_call.hpp"
#include "covergrid/cli/cli.hpp"
#include "covergrid/output/hdf5.hpp"
#include "covergrid/output/rank.hpp"

#include <catch2/catch.hpp>
#include <fmt/format.h>

#include <filesystem>
#include <fstream>
#include <sstream>

namespace fs = std::filesystem;
using covergrid::test::call;
using covergrid::test::ScratchDir;
using covergrid::test::slurp;

namespace {}  // namespace

TEST_CASE("audit exit codes follow the verdict", "[cli][audit]") {
  const auto holds =
      call({"audit", "--method", "clopper-pearson", "--level", "0.95", "--n", "5:60", "--p", "0:1"});
  CHECK(holds.status == 0);
  CHECK(holds.out.find(": holds") != std::string::npos);
  CHECK(holds.out.find("long-run property") != std::string::npos);
  const auto refuted = call({"audit", "--method", "wald", "--level", "0.95", "--n", "10:100", "--p",
                             "0.01:0.99", "--tolerance", "0.02"});
  CHECK(refuted.status == 3);
  CHECK(refuted.out.find(": refuted") != std::string::npos);
  CHECK(refuted.out.find("worst     n = ") != std::string::npos);
  // The threshold on a cell's exact coverage (read from the exact verdict's
  // CSV): simulation cannot decide.
  const auto exact =
      call({"audit", "--method", "wilson", "--level", "0.95", "--n", "40", "--p", "0.3", "--format", "csv"});
  REQUIRE(exact.status == 3);
  const std::string row = exact.out.substr(exact.out.find('\n') + 1);
  std::vector<std::string> fields;
  std::stringstream split(row);
  for (std::string f; std::getline(split, f, ',');) fields.push_back(f);
  REQUIRE(fields.size() > 17);
  const double coverage = std::stod(fields[17]);  // worst_coverage
  REQUIRE(coverage < 0.95);
  const auto inconclusive =
      call({"audit", "--method", "wilson", "--level", "0.95", "--n", "40", "--p", "0.3", "--replicates",
            "300", "--seed", "3", "--tolerance", fmt::format("{:.17g}", 0.95 - coverage)});
  CHECK(inconclusive.status == 4);
  CHECK(inconclusive.out.find(": inconclusive") != std::string::npos);
  CHECK(inconclusive.out.find("Bonferroni over 1 cells") != std::string::npos);
}

TEST_CASE("audit reads a claims file and writes CSV and JSON verdict tables", "[cli][audit]") {
  ScratchDir dir("claims");
  std::ofstream(dir.file("claims.toml")) << R"([[claim]]
name = "exact holds"
method = "clopper-pearson"
level = 0.9
n = { from = 10, to = 30 }
p = { from = 0.0, to = 1.0 }

[[claim]]
name = "wald refuted"
method = "wald"
level = 0.95
n = [20, 40]
p = { from = 0.05, to = 0.95 }
tolerance = 0.01
)";
  const auto csv = call({"audit", "--claims", dir.file("claims.toml"), "--format", "csv"});
  CHECK(csv.status == 3);
  CHECK(csv.out.rfind("claim,verdict,method,", 0) == 0);
  CHECK(csv.out.find("exact holds,holds,clopper-pearson") != std::string::npos);
  CHECK(csv.out.find("wald refuted,refuted,wald") != std::string::npos);
  const auto json =
      call({"audit", "--scenario", dir.file("claims.toml"), "--format", "json", "-o", dir.file("v.json")});
  CHECK(json.status == 3);
  const std::string text = slurp(dir.file("v.json"));
  CHECK(text.find("\"verdict\": \"refuted\"") != std::string::npos);
  CHECK(text.find("\"caution\":") != std::string::npos);
  CHECK_FALSE(fs::exists(dir.file("v.json.partial")));
}

TEST_CASE("audit and plan reject impossible requests with exit 2", "[cli][audit][plan][bad-input]") {
  ScratchDir dir("bad-decisions");
  const std::vector<std::pair<std::vector<std::string>, std::string>> cases = {
      {{"audit", "--method", "wald", "--level", "0.95", "--n", "10:20", "--p", "0.1:0.9", "--tolerance",
        "-0.01"},
       "--tolerance: -0.01 must not be negative"},
      {{"audit", "--method", "wald", "--level", "0.95", "--n", "50:10", "--p", "0.1:0.9"},
       "the range 50..10 is empty"},
      {{"audit", "--method", "wald", "--level", "0.95", "--n", "10:20", "--p", "0.5:1.2"},
       "p must lie in [0, 1]"},
      {{"audit", "--method", "wald", "--level", "0.95", "--n", "10:20", "--p", "0.9:0.1"}, "is empty"},
      {{"audit", "--method", "wald", "--level", "1.5", "--n", "10:20", "--p", "0.1:0.9"},
       "--level: 1.5 is outside"},
      {{"audit", "--level", "0.95", "--n", "10:20", "--p", "0.1:0.9"}, "--method: is required"},
      {{"audit", "--method", "wald", "--level", "0.95", "--n", "10:20", "--p", "0.1:0.9", "--format", "xml"},
       "--format: \"xml\" is not one of"},
      {{"audit", "--claims", dir.file("missing.toml")}, "cannot open the claims file"},
      {{"audit", "--claims", dir.file("missing.toml"), "--level", "0.9"},
       "--level: goes with a claim from options"},
      {{"audit", "--method", "wald", "--level", "0.95", "--n", "10", "--p", "0.5", "-o",
        dir.file("no/such/v.txt")},
       "does not exist"},
      {{"plan", "--method", "wilson", "--level", "0.95", "--p", "0.1:0.9"}, "state at least one of"},
      {{"plan", "--method", "wilson", "--level", "0.95", "--p", "0.1:0.9", "--min-coverage", "1.2"},
       "--min-coverage: 1.2 is outside (0, 1)"},
      {{"plan", "--method", "wilson", "--level", "0.95", "--p", "0.1:0.9", "--max-margin", "0", "--n",
        "1:50"},
       "--max-margin: 0 is outside (0, 1]"},
      {{"plan", "--method", "wilson", "--level", "0.95", "--p", "0.1:0.9", "--max-width", "0.1", "--n",
        "50:5"},
       "is empty"},
      {{"plan", "--method", "blaker", "--side", "lower-bound", "--level", "0.95", "--p", "0.1:0.9",
        "--max-width", "0.1"},
       "does not define the side"},
      {{"plan", "--method", "wilson", "--level", "0.95", "--min-coverage", "0.94"},
       "--p: is required with --min-coverage"},
      {{"plan", "--method", "wilson", "--level", "0.95", "--max-margin", "0.05", "--max-width", "0.1"},
       "--p: is required with --max-width"},
  };
  for (const auto& [args, expected] : cases) {
    const auto r = call(args);
    INFO(args[0] << " ... expecting " << expected << "; got: " << r.err);
    CHECK(r.status == 2);
    CHECK(r.err.find(expected) != std::string::npos);
  }
  CHECK(fs::is_empty(dir.path()));
}

TEST_CASE("plan prints first and stable n for several methods", "[cli][plan]") {
  const auto r = call({"plan", "--method", "wald-half", "--method", "wilson", "--level", "0.95", "--p", "0:1",
                       "--max-margin", "0.05", "--n", "1:1000", "--format", "csv"});
  REQUIRE(r.status == 0);
  // Common practice: the conservative 95 % margin 0.05 needs n = 385.
  CHECK(r.out.find("\"wald-half\",first,385,") != std::string::npos);
  CHECK(r.out.find("\"wald-half\",from,385,") != std::string::npos);
  CHECK(r.out.find("\"wilson\",first,") != std::string::npos);
  const auto text = call({"plan", "--method", "jeffreys", "--level", "0.95", "--p", "0.05:0.95",
                          "--min-coverage", "0.94", "--n", "1:1000"});
  REQUIRE(text.status == 0);
  CHECK(text.out.find("first n that meets it") != std::string::npos);
  CHECK(text.out.find("long-run property") != std::string::npos);
}

namespace {

/// The n of the CSV row "method",answer (empty when no n).
std::string plan_csv_n(const std::string& csv, const std::string& method, const std::string& answer) {
  const std::string key = "\"" + method + "\"," + answer + ",";
  const auto at = csv.find(key);
  if (at == std::string::npos) return "missing";
  const auto from = at + key.size();
  return csv.substr(from, csv.find(',', from) - from);
}

}  // namespace

TEST_CASE("plan exits 5 when no n of the range meets the requirement", "[cli][plan]") {
  // Wald's coverage is 0 next to p = 0 at every n.
  const auto none = call(
      {"plan", "--method", "wald", "--level", "0.95", "--p", "0:1", "--min-coverage", "0.9", "--n", "1:100"});
  CHECK(none.status == 5);
  CHECK(none.out.find("no n in 1..100 meets it; at n = 100:") != std::string::npos);
  // One method without an answer is enough, also in CSV.
  const auto mixed = call({"plan", "--method", "wilson", "--method", "wald", "--level", "0.95",
                           "--max-margin", "0.05", "--n", "1:1000", "--format", "csv"});
  CHECK(mixed.status == 5);
  CHECK(plan_csv_n(mixed.out, "wald", "first") == "");
  CHECK(plan_csv_n(mixed.out, "wilson", "first") != "");
  // The margin plan that answered n = 1 (every Wald interval has zero width
  // there): now no n, and the reason is printed.
  const auto wald = call(
      {"plan", "--method", "wald", "--level", "0.95", "--max-margin", "0.03", "--p", "0:1", "--n", "1:1200"});
  CHECK(wald.status == 5);
  CHECK(wald.out.find("first n that meets it") == std::string::npos);
  CHECK(wald.out.find("the interval at x = 0 has zero width") != std::string::npos);
  const auto met = call({"plan", "--method", "wilson", "--level", "0.95", "--max-margin", "0.05"});
  CHECK(met.status == 0);
  CHECK(met.err.empty());  // stderr is no terminal here: no progress display
}

TEST_CASE("a margin-only plan needs no --p and gives the --p 0:1 answer", "[cli][plan]") {
  for (const char* method : {"wilson", "clopper-pearson"}) {
    const auto without = call({"plan", "--method", method, "--level", "0.9", "--max-margin", "0.04", "--n",
                               "1:800", "--format", "csv"});
    const auto with = call({"plan", "--method", method, "--level", "0.9", "--max-margin", "0.04", "--n",
                            "1:800", "--p", "0:1", "--format", "csv"});
    INFO(method);
    REQUIRE(without.status == 0);
    REQUIRE(with.status == 0);
    CHECK(without.out == with.out);
    CHECK(std::stoi(plan_csv_n(without.out, method, "first")) > 100);
  }
  const auto text = call({"plan", "--method", "wilson", "--level", "0.9", "--max-margin", "0.04"});
  CHECK(text.out.find("p in [0, 1] (no --p: the coverage figures are over all p)") != std::string::npos);
}

TEST_CASE("plan marks an answer far below nominal coverage", "[cli][plan]") {
  const auto far =
      call({"plan", "--method", "wald-cc", "--level", "0.95", "--max-margin", "0.03", "--n", "1:1500"});
  REQUIRE(far.status == 0);
  CHECK(far.out.find("!! coverage far below nominal") != std::string::npos);
  CHECK(far.out.find("below nominal - 0.01 = 0.94") != std::string::npos);
  const auto far_csv = call({"plan", "--method", "wald-cc", "--level", "0.95", "--max-margin", "0.03", "--n",
                             "1:1500", "--format", "csv"});
  CHECK(far_csv.out.find(",1\n") != std::string::npos);  // coverage_far_below = 1
  const auto fine = call({"plan", "--method", "wilson", "--level", "0.95", "--max-margin", "0.03", "--p",
                          "0.05:0.95", "--n", "1:1500"});
  REQUIRE(fine.status == 0);
  CHECK(fine.out.find("first n that meets it") != std::string::npos);
  CHECK(fine.out.find("!! coverage") == std::string::npos);
}

TEST_CASE("plan gives the same answers on 1 and 2 threads", "[cli][plan]") {
  const std::vector<std::string> args = {"plan",     "--method",    "jeffreys", "--method",  "wilson",
                                         "--level",  "0.95",        "--p",      "0.05:0.95", "--min-coverage",
                                         "0.935",    "--max-width", "0.2",      "--n",       "1:700",
                                         "--format", "csv"};
  auto one = args, two = args;
  one.insert(one.end(), {"--threads", "1"});
  two.insert(two.end(), {"--threads", "2"});
  const auto a = call(one), b = call(two);
  REQUIRE(a.status == 0);
  CHECK(a.out == b.out);
}

TEST_CASE("rank orders methods by the stated criterion per n band", "[cli][rank]") {
  ScratchDir dir("rank");
  std::ofstream(dir.file("s.toml")) << R"(seed = 4
[grid]
n = { from = 10, to = 40 }
p = { from = 0.02, to = 0.98, count = 49 }
levels = [0.95]
[[method]]
id = "wald"
[[method]]
id = "wilson"
[[method]]
id = "clopper-pearson"
[[method]]
id = "jeffreys"
[output]
cube = "s.h5"
tables = ""
)";
  REQUIRE(call({"run", dir.file("s.toml"), "--quiet"}).status == 0);
  const auto r = call({"rank", dir.file("s.h5"), "--bands", "10:20,21:40", "--format", "csv"});
  REQUIRE(r.status == 0);
  // Clopper-Pearson never falls below nominal (a proven property), so with
  // tolerance 0 it is the only eligible method and ranks first in each band.
  CHECK(r.out.find("binomial,two-sided,0.95,10,20,exact,1,\"clopper-pearson\",1,") != std::string::npos);
  CHECK(r.out.find("binomial,two-sided,0.95,21,40,exact,1,\"clopper-pearson\",1,") != std::string::npos);
  CHECK(r.out.find("\"wald\",0,") != std::string::npos);
  // A tolerance wide enough for Wilson and Jeffreys puts the shorter first.
  const auto wide = call({"rank", dir.file("s.h5"), "--tolerance", "0.2", "--bands", "21:40"});
  REQUIRE(wide.status == 0);
  CHECK(wide.out.find("shortest mean width") != std::string::npos);
  const auto bad = call({"rank", dir.file("s.h5"), "--bands", "50:60"});
  CHECK(bad.status == 2);
  CHECK(bad.err.find("holds none of the cube's n") != std::string::npos);
  {
    namespace o = covergrid::output;
    o::File f = o::File::create(dir.file("future.h5"));
    o::set_attr(f.id(), "format", std::string("covergrid-cube"));
    o::set_attr(f.id(), "format_version", std::int64_t{99});
  }
  const auto future = call({"rank", dir.file("future.h5")});
  CHECK(future.status == 2);
  CHECK(future.err.find("format version 99") != std::string::npos);
}

TEST_CASE("rank gives paired differences for a simulated-only cube", "[cli][rank][mc]") {
  ScratchDir dir("rank-mc");
  std::ofstream(dir.file("s.toml")) << R"(seed = 77
[grid]
n = [15, 30]
p = { from = 0.1, to = 0.5, count = 5 }
levels = [0.9]
[evaluate]
exact = false
replicates = 3000
[[method]]
id = "wilson"
[[method]]
id = "agresti-coull"
[[method]]
id = "wald"
[output]
cube = "s.h5"
tables = ""
)";
  REQUIRE(call({"run", dir.file("s.toml"), "--quiet"}).status == 0);
  const covergrid::output::CubeReader cube(dir.file("s.h5"));
  covergrid::output::RankOptions o;
  o.bands = {{15, 30}};
  o.criterion = covergrid::output::RankCriterion::safest;
  const auto groups = covergrid::output::rank_methods(cube, o);
  REQUIRE(groups.size() == 1);
  const auto& g = groups[0];
  CHECK(g.simulated);
  REQUIRE(g.entries.size() == 3);
  CHECK_FALSE(g.entries[0].has_pair);
  // On common random numbers the paired difference of each cell is exactly
  // the difference of the two simulated coverages stored in the cube.
  for (std::size_t r = 1; r < 3; ++r) {
    const auto& e = g.entries[r];
    REQUIRE(e.has_pair);
    double sum = 0;
    for (std::size_t ni = 0; ni < 2; ++ni) {
      const auto a = cube.mc_row("coverage", 0, 0, 0, e.method, ni);
      const auto b = cube.mc_row("coverage", 0, 0, 0, g.entries[0].method, ni);
      for (std::size_t pi = 0; pi < a.size(); ++pi) sum += a[pi] - b[pi];
    }
    CHECK(e.pair_difference == Approx(sum / 10).margin(1e-12));
    CHECK(e.pair_se >= 0);  // zero where two methods agree on every draw
    if (cube.methods[e.method] == "wald") CHECK(e.pair_se > 0);
    CHECK(e.worst_coverage <= g.entries[0].worst_coverage);
  }
  const auto text = call({"rank", dir.file("s.h5"), "--bands", "15:30"});
  CHECK(text.out.find("coverage vs first (paired)") != std::string::npos);
}
