// The claims-file loader: a good file in, validated claims out; every kind of
// bad input names the file, the line and the key.
#include "covergrid/engine/error.hpp"
#include "covergrid/scenarios/claims.hpp"

#include <catch2/catch.hpp>

using covergrid::InputError;
using covergrid::scenarios::load_claims_text;

TEST_CASE("a claims file with several claims loads", "[scenarios][claims]") {
  const auto claims = load_claims_text(R"(seed = 5
[[claim]]
name = "supplier statement"
method = "wilson"
level = 0.95
n = { from = 30, to = 60, step = 10 }
p = { from = 0.05, to = 0.95 }
tolerance = 0.01

[[claim]]
method = { id = "jeffreys", boundary = false }
level = 0.9
side = "upper-bound"
n = [12, 8, 20]
p = 0.2
about = "mean"
replicates = 1000
p_points = 5
confidence = 0.99
)",
                                       "claims.toml");
  REQUIRE(claims.size() == 2);
  CHECK(claims[0].name == "supplier statement");
  CHECK(claims[0].n == std::vector<int>{30, 40, 50, 60});
  CHECK(claims[0].threshold() == Approx(0.94));
  CHECK(claims[0].kind == covergrid::engine::ClaimKind::minimum);
  CHECK(claims[0].replicates == 0);
  CHECK(claims[1].name == "claim 2");
  CHECK(claims[1].method.label == "jeffreys(boundary=false)");
  CHECK(claims[1].n == std::vector<int>{8, 12, 20});
  CHECK(claims[1].p_lo == 0.2);
  CHECK(claims[1].p_hi == 0.2);
  CHECK(claims[1].side == covergrid::methods::Side::upper_bound);
  CHECK(claims[1].kind == covergrid::engine::ClaimKind::mean);
  CHECK(claims[1].seed == 5);
  CHECK(claims[1].p_points == 5);
  CHECK(claims[1].confidence == 0.99);
}

TEST_CASE("malformed claims files are rejected with file, line and key", "[scenarios][claims][bad-input]") {
  const std::string head = "[[claim]]\nmethod = \"wilson\"\nlevel = 0.95\n";
  struct Bad {
    std::string text, expected;
  };
  const std::vector<Bad> cases = {
      {head + "n = 30\np = { from = 0.1, to = 0.9 }\ntolerance = -0.01\n",
       "c.toml:6: [[claim]] tolerance = -0.01 must not be negative"},
      {head + "n = { from = 50, to = 10 }\np = 0.5\n",
       "c.toml:4: [[claim]] n.to = 10 is below [[claim]] n.from = 50"},
      {head + "n = []\np = 0.5\n", "c.toml:4: [[claim]] n is an empty list"},
      {head + "n = 30\np = { from = 0.5, to = 1.2 }\n", "c.toml:5: [[claim]] p.to = 1.2 is outside [0, 1]"},
      {head + "n = 30\np = { from = 0.6, to = 0.2 }\n", "the range is empty"},
      {head + "n = 30\np = 0.5\ncolour = 1\n", "c.toml:6: [[claim]] unknown key 'colour'"},
      {"[[claim]]\nmethod = \"walt\"\nlevel = 0.95\nn = 3\np = 0.5\n",
       "c.toml:2: [[claim]] method \"walt\" is not a known"},
      {"[[claim]]\nmethod = \"blaker\"\nlevel = 0.95\nside = \"lower-bound\"\nn = 3\np = 0.5\n",
       "c.toml:4: [[claim]] blaker does not define the side"},
      {head + "n = 30\np = 0.5\np_points = 11\n",
       "c.toml:6: [[claim]] p_points and confidence go with replicates"},
      {head + "n = 30\np = 0.5\nabout = \"median\"\n",
       "c.toml:6: [[claim]] about = \"median\" is not one of"},
      {head + "n = 30\np = 0.5\ntolerance = 0.95\n", "is not below the level"},
      {"[[claim]]\nmethod = \"wilson\"\nn = 3\np = 0.5\n", "c.toml:1: [[claim]] \"claim 1\" needs 'level'"},
      {"seed = 3\n", "c.toml: no [[claim]] entries"},
      {"[[claim]\n", "c.toml:1: TOML syntax error"},
      {head + "n = 0\np = 0.5\n", "c.toml:4: [[claim]] n = 0 is below 1"},
      {head + "n = 30\np = 0.5\nreplicates = -4\n",
       "c.toml:6: [[claim]] replicates = -4 must not be negative"},
  };
  for (const auto& c : cases) {
    INFO(c.text);
    CHECK_THROWS_WITH(load_claims_text(c.text, "c.toml"), Catch::Contains(c.expected));
  }
}

TEST_CASE("the bundled example claims file loads", "[scenarios][claims]") {
  const auto claims =
      covergrid::scenarios::load_claims_file(COVERGRID_SCENARIO_DIR "/claims/release-claims.toml");
  REQUIRE(claims.size() == 4);
  CHECK(claims[1].side == covergrid::methods::Side::upper_bound);
  CHECK(claims[3].replicates == 20000);
  CHECK(claims[3].seed == 90210);
}

TEST_CASE("an n step near INT64_MAX expands to the one value in range, never wraps",
          "[scenarios][claims][robustness]") {
  // Was signed overflow in the loader (UBSan abort) and n = 30..0 in the
  // Release build ("refuted at n = 1").
  const auto claims = load_claims_text(
      "[[claim]]\nmethod = \"wilson\"\nlevel = 0.95\np = 0.5\n"
      "n = { from = 30, to = 120, step = 9223372036854775807 }\n",
      "c.toml");
  REQUIRE(claims.size() == 1);
  CHECK(claims[0].n == std::vector<int>{30});
  const auto stepped = load_claims_text(
      "[[claim]]\nmethod = \"wilson\"\nlevel = 0.95\np = 0.5\n"
      "n = { from = 30, to = 120, step = 45 }\n",
      "c.toml");
  CHECK(stepped[0].n == std::vector<int>{30, 75, 120});
}
