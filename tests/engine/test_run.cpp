// The run loop: every cell computed exactly once, results independent of the
// thread count, and a stopped run resumed to the same result.
#include "support.hpp"

#include "covergrid/engine/plan.hpp"
#include "covergrid/engine/run.hpp"

#include <catch2/catch.hpp>

#include <array>
#include <stdexcept>

#include <algorithm>
#include <atomic>
#include <optional>
#include <cstring>

namespace e = covergrid::engine;
using covergrid::test::MemorySink;
using covergrid::test::scenario_from;

namespace {

const char* grid_text = R"(
title = "run-loop test"
[grid]
n = { from = 1, to = 40 }
p = { from = 0.0, to = 1.0, count = 301 }
levels = [0.9, 0.95]
sides = ["two-sided", "lower-bound"]
[[method]]
id = "wald"
[[method]]
id = "clopper-pearson"
[[method]]
id = "blaker"
[[method]]
id = "bayes-hpd"
a = 0.5
b = 0.5
)";

bool same_bits(const std::vector<double>& a, const std::vector<double>& b) {
  return a.size() == b.size() && std::memcmp(a.data(), b.data(), a.size() * sizeof(double)) == 0;
}

}  // namespace

TEST_CASE("the plan covers every cell exactly once", "[engine][plan]") {
  const auto s = scenario_from(grid_text);
  for (std::size_t target : {1u, 7u, 301u, 2048u, 100000u}) {
    const auto plan = e::make_plan(s, target);
    std::vector<int> seen(s.n.size() * s.p.size(), 0);
    for (std::size_t k = 0; k < plan.chunks.size(); ++k) {
      const auto& c = plan.chunks[k];
      CHECK(c.id == k);
      for (std::size_t i = 0; i < c.n_count; ++i)
        for (std::size_t j = 0; j < c.p_count; ++j) ++seen[(c.n_begin + i) * s.p.size() + c.p_begin + j];
    }
    INFO("target " << target);
    CHECK(std::all_of(seen.begin(), seen.end(), [](int v) { return v == 1; }));
  }
}

TEST_CASE("chunks are computed from their index in the documented order", "[engine][plan]") {
  // The order the journal, the shard cut and the cube rely on: model-major,
  // then n-block, then p-block, the last block of each axis shorter.
  for (const auto& [models, rows, points, nb, pb] :
       std::vector<std::array<std::size_t, 5>>{{1, 10, 7, 3, 2}, {2, 1, 5000, 1, 2048}, {3, 17, 1, 16, 1}}) {
    const e::ChunkList list(models, rows, points, nb, pb);
    std::vector<e::ChunkSpec> expected;
    for (std::size_t m = 0; m < models; ++m)
      for (std::size_t n = 0; n < rows; n += nb)
        for (std::size_t p = 0; p < points; p += pb)
          expected.push_back({expected.size(), m, n, std::min(nb, rows - n), p, std::min(pb, points - p)});
    REQUIRE(list.size() == expected.size());
    std::size_t k = 0;
    for (const auto& c : list) CHECK(c == expected[k++]);
    CHECK(list.back() == expected.back());
    CHECK_THROWS_AS(list.at(list.size()), std::out_of_range);
  }
  // A grid at the scenario limit (10^9 cells: 10^6 n by 1000 p) plans in
  // constant memory: 500,000 chunks, none of them stored.
  const e::ChunkList big(1, 1000000, 1000, 2, 1000);
  CHECK(big.size() == 500000);
  const auto last = big[499999];
  CHECK(last.n_begin == 999998);
  CHECK(last.n_count == 2);
  CHECK(last.p_count == 1000);
  CHECK(sizeof(e::Plan) < 128);
}

TEST_CASE("results do not depend on the thread count", "[engine][determinism]") {
  const auto s = scenario_from(grid_text);
  const auto plan = e::make_plan(s);
  MemorySink one(s, plan), two(s, plan);
  e::RunOptions o1, o2;
  o1.threads = 1;
  o2.threads = 2;
  e::run_scenario(s, one, o1);
  e::run_scenario(s, two, o2);
  CHECK(one.finished);
  CHECK(two.finished);
  for (std::size_t k = 0; k < e::metric_count; ++k) CHECK(same_bits(one.exact[k], two.exact[k]));
  for (std::size_t k = 0; k < e::stat_count; ++k) CHECK(same_bits(one.stats[k], two.stats[k]));
  // Blaker is two-sided only: its lower-bound cells are NaN, the rest are not.
  const std::size_t combos = e::combo_count(s);
  std::size_t nan_rows = 0;
  for (std::size_t c = 0; c < combos; ++c)
    if (std::isnan(one.exact[0][one.at(c, 0, 0) * s.p.size()])) ++nan_rows;
  CHECK(nan_rows == s.levels.size());  // blaker x lower-bound x each level
}

TEST_CASE("a stopped run resumes to the same result", "[engine][resume]") {
  const auto s = scenario_from(grid_text);
  const auto plan = e::make_plan(s, 128);  // many small chunks
  MemorySink fresh(s, plan), resumed(s, plan);
  e::RunOptions o;
  o.threads = 2;
  o.chunk_cells = 128;
  e::run_scenario(s, fresh, o);

  std::atomic<bool> stop{false};
  o.stop = &stop;
  o.progress = [&](std::size_t, std::size_t) { stop = true; };  // stop after the first batch
  const auto first = e::run_scenario(s, resumed, o);
  CHECK(first.interrupted);
  CHECK_FALSE(resumed.finished);
  CHECK(first.chunks_computed < first.chunks_total);
  stop = false;
  o.progress = nullptr;
  const auto second = e::run_scenario(s, resumed, o);
  CHECK_FALSE(second.interrupted);
  CHECK(second.chunks_resumed == first.chunks_computed);
  CHECK(second.chunks_resumed + second.chunks_computed == second.chunks_total);
  CHECK(resumed.finished);
  for (std::size_t k = 0; k < e::metric_count; ++k) CHECK(same_bits(fresh.exact[k], resumed.exact[k]));
  for (std::size_t k = 0; k < e::stat_count; ++k) CHECK(same_bits(fresh.stats[k], resumed.stats[k]));

  // Rows split over chunks (grid statistics from the read-back pass) give the
  // same figures as whole-row chunks (statistics computed with the chunk).
  const auto whole_plan = e::make_plan(s);
  REQUIRE(whole_plan.p_block == s.p.size());
  REQUIRE(plan.p_block < s.p.size());
  MemorySink whole(s, whole_plan);
  e::run_scenario(s, whole, e::RunOptions{});
  for (std::size_t k = 0; k < e::metric_count; ++k) CHECK(same_bits(fresh.exact[k], whole.exact[k]));
  for (std::size_t k = 0; k < e::stat_count; ++k) CHECK(same_bits(fresh.stats[k], whole.stats[k]));
}

TEST_CASE("grid statistics follow their definitions", "[engine][summary]") {
  const std::vector<double> p = {0.1, 0.2, 0.3, 0.4};
  const double cov[] = {0.97, 0.93, 0.95, 0.91};
  const double width[] = {0.1, 0.2, 0.3, 0.4};
  const double lo[] = {0.01, 0.03, 0.02, 0.05};
  const double hi[] = {0.02, 0.04, 0.03, 0.04};
  double st[e::grid_stat_count];
  e::grid_stats(cov, width, lo, hi, p, 0.95, st);
  CHECK(st[e::index(e::Stat::mean_coverage)] == Approx(0.94));
  CHECK(st[e::index(e::Stat::min_coverage)] == 0.91);
  CHECK(st[e::index(e::Stat::min_coverage_p)] == 0.4);
  CHECK(st[e::index(e::Stat::rms_deviation)] == Approx(std::sqrt((4e-4 + 4e-4 + 0 + 16e-4) / 4)));
  CHECK(st[e::index(e::Stat::share_below)] == 0.5);
  CHECK(st[e::index(e::Stat::mean_width)] == Approx(0.25));
  CHECK(st[e::index(e::Stat::mean_miss_low)] == Approx(0.0275));
  CHECK(st[e::index(e::Stat::mean_miss_high)] == Approx(0.0325));
}

TEST_CASE("chunks computed through a feed in shuffled order equal a run's", "[engine][feed]") {
  // Rows split over p-blocks (chunk_cells 150 < 301 points), Monte Carlo on,
  // chunks dealt in a scrambled order: the shared row-table cache and the
  // out-of-order output must not change a bit.
  auto s = scenario_from(std::string("seed = 9\n") + grid_text);
  s.replicates = 64;
  const auto plan = e::make_plan(s, 150);
  REQUIRE(plan.p_block < s.p.size());
  e::RunOptions o;
  o.chunk_cells = 150;
  o.threads = 2;
  MemorySink reference(s, plan);
  e::run_scenario(s, reference, o);

  struct Shuffled final : e::ChunkFeed {
    std::vector<std::size_t> order;
    std::size_t next_index = 0;
    MemorySink* sink = nullptr;
    std::vector<std::size_t> seen;
    std::optional<std::size_t> next() override {
      if (next_index == order.size()) return std::nullopt;
      return order[next_index++];
    }
    void done(e::ChunkResult&& r) override {
      seen.push_back(r.spec.id);
      sink->write_chunk(r);
    }
  } feed;
  for (std::size_t k = 0; k < plan.chunks.size(); ++k) feed.order.push_back((k * 7) % plan.chunks.size());
  std::sort(feed.order.begin(), feed.order.end());
  feed.order.erase(std::unique(feed.order.begin(), feed.order.end()), feed.order.end());
  REQUIRE(feed.order.size() == plan.chunks.size());  // 7 is prime to the chunk count
  for (std::size_t k = 0; k < plan.chunks.size(); ++k) feed.order[k] = (k * 7) % plan.chunks.size();
  MemorySink fed(s, plan);
  feed.sink = &fed;
  e::compute_feed(s, plan, feed, 2);
  CHECK(feed.seen.size() == plan.chunks.size());
  e::finish_scenario(s, plan, fed);
  for (std::size_t k = 0; k < e::metric_count; ++k) CHECK(same_bits(reference.exact[k], fed.exact[k]));
  for (std::size_t k = 0; k < e::mc_metric_count; ++k) CHECK(same_bits(reference.mc[k], fed.mc[k]));
  for (std::size_t k = 0; k < e::stat_count; ++k) CHECK(same_bits(reference.stats[k], fed.stats[k]));
  for (std::size_t k = 0; k < e::grid_stat_count; ++k)
    CHECK(same_bits(reference.mc_stats[k], fed.mc_stats[k]));
  CHECK(same_bits(reference.mc_replicates, fed.mc_replicates));
}
