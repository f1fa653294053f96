// The scenario loader: the grid forms of the schema, defaults, and every
// malformed file in tests/scenarios/bad/ (each names its expected line and
// message in its first line, "# expect: LINE | TEXT"; LINE 0 = no line).
#include "support.hpp"

#include "covergrid/engine/error.hpp"
#include "covergrid/scenarios/loader.hpp"

#include <catch2/catch.hpp>
#include <fmt/format.h>

#include <algorithm>
#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <sstream>

namespace fs = std::filesystem;
using covergrid::test::scenario_from;

TEST_CASE("grid forms expand as documented", "[scenarios]") {
  covergrid::test::ScratchDir dir("forms");
  fs::create_directories(dir.path() / "sub");
  const std::string base = dir.path().string();
  const auto s = scenario_from(R"(
title = "forms"
seed = 11
[grid]
n = { from = 10, to = 1000, count = 5, spacing = "log" }
p = { from = 0.01, to = 0.99, count = 3, spacing = "logit" }
levels = [0.99, 0.9]
sides = ["upper-bound", "two-sided"]
[[method]]
id = "jeffreys"
boundary = false
label = "jeffreys-plain"
[[method]]
id = "bayes-hpd"
a = 0.5
b = 2
)",
                               base);
  CHECK(s.title == "forms");
  CHECK(s.seed == 11);
  CHECK(s.n == std::vector<int>{10, 32, 100, 316, 1000});
  REQUIRE(s.p.size() == 3);
  CHECK(s.p[0] == 0.01);
  CHECK(s.p[1] == Approx(0.5).margin(1e-15));
  CHECK(s.p[2] == 0.99);
  CHECK(s.levels == std::vector<double>{0.9, 0.99});
  CHECK(s.sides == std::vector<covergrid::methods::Side>{covergrid::methods::Side::two_sided,
                                                         covergrid::methods::Side::upper_bound});
  REQUIRE(s.methods.size() == 2);
  CHECK(s.methods[0].label == "jeffreys-plain");
  CHECK(s.methods[1].label == "bayes-hpd(a=0.5,b=2)");
  CHECK(s.models.size() == 1);
  CHECK(s.cube_path == base + "/test.h5");
  CHECK(s.tables_prefix == base + "/test");
  CHECK(s.sha256.size() == 64);

  const auto t = scenario_from(R"(
[grid]
n = { from = 5, to = 20, step = 5 }
p = { from = 0.1, to = 0.5, step = 0.1 }
levels = 0.95
[[method]]
id = "wald"
[output]
cube = "sub/x.h5"
tables = ""
)",
                               base);
  CHECK(t.n == std::vector<int>{5, 10, 15, 20});
  REQUIRE(t.p.size() == 5);
  CHECK(t.p.back() == Approx(0.5));
  CHECK(t.sides == std::vector<covergrid::methods::Side>{covergrid::methods::Side::two_sided});
  CHECK(t.cube_path == base + "/sub/x.h5");
  CHECK(t.tables_prefix.empty());
  CHECK(t.exact);
}

/// The double nearest to the decimal `units` * 10^exponent, parsed from its
/// digits (strtod rounds correctly: C17 7.22.1.3 with the usual IEEE libc).
double decimal(long units, int exponent) {
  return std::strtod(fmt::format("{}e{}", units, exponent).c_str(), nullptr);
}

TEST_CASE("linear grids hold the decimals the user wrote", "[scenarios]") {
  covergrid::test::ScratchDir dir("decimals");
  const auto s = scenario_from(R"(
[grid]
n = { from = 10, to = 40, count = 7 }
p = { from = 0.01, to = 0.99, count = 197 }
levels = 0.95
[[method]]
id = "wald"
)",
                               dir.path().string());
  // 0.01 + i * 0.005 = (10 + 5 i) / 1000 exactly, as decimals.
  REQUIRE(s.p.size() == 197);
  std::size_t off = 0;
  for (std::size_t i = 0; i < s.p.size(); ++i) {
    const double want = decimal(10 + 5 * static_cast<long>(i), -3);
    if (s.p[i] != want) ++off;
    CHECK(s.p[i] == want);
  }
  CHECK(off == 0);
  CHECK(std::find(s.p.begin(), s.p.end(), 0.05) != s.p.end());
  CHECK(std::find(s.p.begin(), s.p.end(), 0.35) != s.p.end());
  CHECK(s.n == std::vector<int>{10, 15, 20, 25, 30, 35, 40});

  // The step form too: 0.1 + i * 0.1 is 0.30000000000000004 at i = 2 in
  // binary arithmetic.
  const auto t = scenario_from(R"(
[grid]
n = 5
p = { from = 0.1, to = 0.9, step = 0.1 }
levels = 0.95
[[method]]
id = "wald"
)",
                               dir.path().string());
  REQUIRE(t.p.size() == 9);
  for (std::size_t i = 0; i < t.p.size(); ++i) CHECK(t.p[i] == decimal(static_cast<long>(i) + 1, -1));

  // A step with no short decimal stays as computed: 0 + i / 6.
  const auto u = scenario_from(R"(
[grid]
n = 5
p = { from = 0, to = 1, count = 7 }
levels = 0.95
[[method]]
id = "wald"
)",
                               dir.path().string());
  REQUIRE(u.p.size() == 7);
  for (std::size_t i = 1; i + 1 < u.p.size(); ++i) CHECK(u.p[i] == static_cast<double>(i) * (1.0 / 6.0));
}

TEST_CASE("the bundled demo and example scenarios load", "[scenarios]") {
  const auto demo = covergrid::scenarios::load_scenario_text(covergrid::scenarios::bundled_demo_text(),
                                                             "<bundled demo>", "");
  CHECK_FALSE(demo.title.empty());
  CHECK(demo.methods.size() >= 5);
  std::size_t count = 0;
  for (const auto& entry : fs::directory_iterator(COVERGRID_SCENARIO_DIR)) {
    if (entry.path().extension() != ".toml") continue;
    INFO(entry.path());
    CHECK_NOTHROW(covergrid::scenarios::load_scenario_file(entry.path().string()));
    ++count;
  }
  CHECK(count >= 3);
}

TEST_CASE("every malformed scenario names its line and key", "[scenarios][bad-input]") {
  const fs::path dir = fs::path(COVERGRID_TEST_DIR) / "scenarios" / "bad";
  std::size_t count = 0;
  for (const auto& entry : fs::directory_iterator(dir)) {
    if (entry.path().extension() != ".toml") continue;
    std::ifstream in(entry.path());
    std::string first;
    std::getline(in, first);
    REQUIRE(first.rfind("# expect: ", 0) == 0);
    const auto bar = first.find(" | ");
    const int line = std::stoi(first.substr(10, bar - 10));
    const std::string text = first.substr(bar + 3);
    const std::string where =
        line > 0 ? fmt::format("{}:{}: ", entry.path().string(), line) : entry.path().string() + ": ";
    INFO(entry.path().filename().string() << " expects \"" << where << "..." << text << "\"");
    try {
      covergrid::scenarios::load_scenario_file(entry.path().string());
      FAIL("the file loaded without error");
    } catch (const covergrid::InputError& e) {
      const std::string msg = e.what();
      INFO("message: " << msg);
      CHECK(msg.rfind(where, 0) == 0);
      CHECK(msg.find(text) != std::string::npos);
    }
    ++count;
  }
  CHECK(count >= 15);
}

TEST_CASE("[[model]] kinds are read through the engine's model registry", "[scenarios][model]") {
  const auto s = covergrid::test::scenario_from(R"(
[grid]
n = [10]
p = [0.5]
levels = [0.95]
[[method]]
id = "wilson"
[[model]]
kind = "binomial"
[[model]]
kind = "binomial"
label = "with replacement"
)");
  REQUIRE(s.models.size() == 2);
  CHECK(s.models[0].label == "binomial");
  CHECK(s.models[1].label == "with replacement");
  for (const auto& m : s.models) {
    REQUIRE(m.model != nullptr);
    CHECK(m.model->kind() == "binomial");
  }
  // Model parameters are resolved by the registry's parameter list and
  // label the model unless a label is given.
  const auto finite = covergrid::test::scenario_from(R"(
[grid]
n = [10, 50]
p = [0.5]
levels = [0.95]
[[method]]
id = "wilson"
[[model]]
kind = "hypergeometric"
population = 5000
[[model]]
kind = "hypergeometric"
population = 50
label = "census at 50"
)");
  REQUIRE(finite.models.size() == 2);
  CHECK(finite.models[0].label == "hypergeometric(N=5000)");
  CHECK(finite.models[0].model->design().population == 5000);
  CHECK(std::get<double>(finite.models[0].params.at("population")) == 5000);
  CHECK(finite.models[1].label == "census at 50");
  CHECK(finite.models[1].model->lattice() == 50);
  const auto clustered = covergrid::test::scenario_from(
      "[grid]\nn = [20, 40]\np = [0.5]\nlevels = [0.95]\n[[method]]\nid = \"wilson\"\n[[model]]\n"
      "kind = \"beta-binomial\"\ncluster_size = 20\nicc = 0.05\n");
  REQUIRE(clustered.models.size() == 1);
  CHECK(clustered.models[0].label == "beta-binomial(k=20,icc=0.05)");
  CHECK(clustered.models[0].model->design().cluster_size == 20);
  // Without [[model]], one binomial model.
  const auto plain = covergrid::test::scenario_from(
      "[grid]\nn = [10]\np = [0.5]\nlevels = [0.95]\n[[method]]\nid = \"wilson\"\n");
  REQUIRE(plain.models.size() == 1);
  CHECK(plain.models[0].model->kind() == "binomial");
}
