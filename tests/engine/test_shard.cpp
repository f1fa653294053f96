// Shard selection: K/N parsing, a deterministic contiguous cut that covers
// every chunk exactly once, balanced by estimated cost (and measurably better
// than cutting by chunk count), shard file names.
#include "support.hpp"

#include "covergrid/engine/error.hpp"
#include "covergrid/engine/shard.hpp"

#include <catch2/catch.hpp>

#include <algorithm>
#include <numeric>

using namespace covergrid;
using covergrid::test::scenario_from;

namespace {

// 40 rows of n, geometric from 10 to 100000, one chunk per row (2048 p): the
// cost per chunk grows about 100-fold along the plan. Only planned here.
const char* uneven = R"(
[grid]
n = { from = 10, to = 100000, count = 40, spacing = "log" }
p = { from = 0.01, to = 0.99, count = 2048 }
levels = 0.95
[[method]]
id = "wilson"
[output]
tables = ""
)";

double cost_of(const engine::Scenario& s, const engine::Plan& plan, const std::vector<std::size_t>& ids) {
  double c = 0;
  for (std::size_t id : ids) c += engine::chunk_cost(s, plan.chunks[id]);
  return c;
}

}  // namespace

TEST_CASE("shard K/N option values are parsed and checked", "[engine][shard]") {
  const auto s = engine::parse_shard("3/16");
  CHECK(s.index == 3);
  CHECK(s.count == 16);
  CHECK(s.label() == "3/16");
  CHECK(engine::parse_shard("1/1").count == 1);
  for (const char* bad :
       {"0/4", "5/4", "x", "3/", "/4", "-1/4", "3/4/5", " 3/4", "3/4 ", "1/0", "2.5/4", ""}) {
    INFO(bad);
    try {
      engine::parse_shard(bad);
      FAIL("accepted");
    } catch (const InputError& e) {
      CHECK(std::string(e.what()).rfind("--shard " + std::string(bad) + ": ", 0) == 0);
    }
  }
  CHECK_THROWS_WITH(engine::parse_shard("5/4"), "--shard 5/4: K must be from 1 to N = 4");
}

TEST_CASE("shards cover every chunk exactly once, contiguously, and deterministically", "[engine][shard]") {
  const auto s = scenario_from(uneven);
  const auto plan = engine::make_plan(s);
  REQUIRE(plan.chunks.size() == 40);
  for (std::size_t N = 1; N <= plan.chunks.size(); ++N) {
    INFO("N = " << N);
    std::vector<std::size_t> all;
    for (std::size_t k = 1; k <= N; ++k) {
      const auto ids = engine::shard_chunks(s, plan, {k, N});
      REQUIRE_FALSE(ids.empty());
      for (std::size_t i = 1; i < ids.size(); ++i) CHECK(ids[i] == ids[i - 1] + 1);
      CHECK(ids == engine::shard_chunks(s, plan, {k, N}));
      all.insert(all.end(), ids.begin(), ids.end());
    }
    std::vector<std::size_t> expected(plan.chunks.size());
    std::iota(expected.begin(), expected.end(), std::size_t{0});
    CHECK(all == expected);
  }
  CHECK_THROWS_WITH(engine::shard_chunks(s, plan, {1, 41}),
                    "--shard 1/41: this scenario has 40 chunks, so N can be at most 40");
}

TEST_CASE("shards are balanced by estimated cost, not by chunk count", "[engine][shard]") {
  const auto s = scenario_from(uneven);
  const auto plan = engine::make_plan(s);
  // The cost grows with n (sqrt(n) per cell plus the O(n) tables).
  CHECK(engine::chunk_cost(s, plan.chunks[39]) > 50 * engine::chunk_cost(s, plan.chunks[0]));
  double total = 0, largest = 0;
  for (const auto& c : plan.chunks) {
    total += engine::chunk_cost(s, c);
    largest = std::max(largest, engine::chunk_cost(s, c));
  }
  for (std::size_t N : {2, 3, 4, 7}) {
    INFO("N = " << N);
    const double share = total / static_cast<double>(N);
    // Each cut is the prefix closest to its target, so a shard's cost is
    // within one chunk's cost of total / N.
    double worst = 0;
    for (std::size_t k = 1; k <= N; ++k)
      worst = std::max(worst, std::abs(cost_of(s, plan, engine::shard_chunks(s, plan, {k, N})) - share));
    CHECK(worst <= largest);
    // Cutting into equal numbers of chunks misses that bound on this grid.
    double naive = 0;
    for (std::size_t k = 0; k < N; ++k) {
      std::vector<std::size_t> ids;
      for (std::size_t id = k * 40 / N; id < (k + 1) * 40 / N; ++id) ids.push_back(id);
      naive = std::max(naive, std::abs(cost_of(s, plan, ids) - share));
    }
    CHECK(naive > largest);
  }
}

TEST_CASE("shard cubes are named beside the cube, sorting in shard order", "[engine][shard]") {
  CHECK(engine::shard_cube_path("out/run.h5", {3, 16}) == "out/run.shard-03-of-16.h5");
  CHECK(engine::shard_cube_path("run.h5", {12, 16}) == "run.shard-12-of-16.h5");
  CHECK(engine::shard_cube_path("cube", {1, 2}) == "cube.shard-1-of-2");
  CHECK(engine::shard_cube_path("/a/b.c/x.h5", {7, 100}) == "/a/b.c/x.shard-007-of-100.h5");
}
