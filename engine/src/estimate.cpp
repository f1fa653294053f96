#include "covergrid/engine/estimate.hpp"

#include "covergrid/engine/metrics.hpp"
#include "covergrid/engine/monte_carlo.hpp"
#include "covergrid/engine/run.hpp"
#include "covergrid/engine/shard.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdint>
#include <thread>

namespace covergrid::engine {

namespace {

// Calibration budget: chunks are timed cheapest first until this much time
// has been spent or kMaxTimed chunks are done; a chunk the rate so far
// predicts to take longer than kMaxChunkSeconds is not started.
constexpr double kBudgetSeconds = 0.5;
constexpr double kMaxChunkSeconds = 1.0;
constexpr std::size_t kSampled = 9, kMaxTimed = 4;
// After the first chunk, calibration stops once it has done this share of
// the run's estimated cost, so that a small run is not slowed by it.
constexpr double kMaxShare = 0.02;
// Replicates per cell in a calibration probe (see estimate_run).
constexpr std::uint64_t kProbeReplicates = 64;

// Writing the output, one chunk at a time beside the computation (journal
// record, then the cube's storage chunks, checksummed, not deflated):
// about 1.5 s per GB of data on the project's two-core machine (the
// prototype grid's 110 MB in 0.13 to 0.20 s, `scripts/bench whole`,
// 2026-12-03; it was 12 s per GB when the cube was deflated and assembled
// from the journal at the end).
constexpr double kAssemblySecondsPerByte = 1.5e-9;

}  // namespace

RunEstimate estimate_run(const Scenario& scenario, const Plan& plan, const std::vector<std::size_t>& todo,
                         int threads) {
  RunEstimate e;
  const unsigned hw = std::max(1u, std::thread::hardware_concurrency());
  e.threads = threads > 0 ? threads : static_cast<int>(hw);
  double total_cost = 0;
  for (std::size_t id : todo) {
    e.cells += plan.chunks[id].n_count * plan.chunks[id].p_count;
    total_cost += chunk_cost(scenario, plan.chunks[id]);
  }
  // Data size of the whole cube: /exact and /mc metrics per (cell, combo),
  // the replicate counts per cell, and the summaries per (model, combo, n).
  double all_cells = 0;
  for (const auto& c : plan.chunks) all_cells += static_cast<double>(c.n_count * c.p_count);
  const double combos = static_cast<double>(combo_count(scenario));
  const double rows = static_cast<double>(scenario.models.size() * scenario.n.size()) * combos;
  double per_cell = 0, per_row = 0;
  if (scenario.exact) {
    per_cell += combos * metric_count * 8.0;
    per_row += stat_count * 8.0;
  }
  if (scenario.replicates > 0) {
    per_cell += combos * mc_metric_count * 8.0 + 8.0;
    per_row += grid_stat_count * 8.0;
  }
  e.cube_bytes = all_cells * per_cell + rows * per_row;
  e.journal_bytes = static_cast<double>(e.cells) * per_cell + rows * per_row;
  if (todo.empty()) return e;

  // Sample chunks spread over the work, time the cheapest first.
  std::vector<std::size_t> sample;
  for (std::size_t k = 0; k < kSampled; ++k) {
    const std::size_t at = todo[(todo.size() - 1) * k / std::max<std::size_t>(1, kSampled - 1)];
    if (std::find(sample.begin(), sample.end(), at) == sample.end()) sample.push_back(at);
  }
  std::sort(sample.begin(), sample.end(), [&](std::size_t a, std::size_t b) {
    return chunk_cost(scenario, plan.chunks[a]) < chunk_cost(scenario, plan.chunks[b]);
  });
  // The timed work is a probe of each sampled chunk, never the chunk
  // itself, so that its time is bounded whatever the grid: the chunk's first
  // n row only, with at most kProbeReplicates replicates per cell (fixed,
  // not adaptive). The cost model (chunk_cost) is linear in rows and in
  // replicates, so the probes' seconds per unit of cost carry over to the
  // whole run (replicates = 10^10 once made --dry-run compute for minutes).
  Scenario probe_scenario = scenario;
  probe_scenario.replicates = std::min<std::uint64_t>(scenario.replicates, kProbeReplicates);
  probe_scenario.target_se = 0;
  const auto start = std::chrono::steady_clock::now();
  double timed_cost = 0, timed_seconds = 0;
  for (std::size_t id : sample) {
    ChunkSpec probe = plan.chunks[id];
    probe.n_count = 1;
    const double cost = chunk_cost(probe_scenario, probe);
    if (e.chunks_timed > 0 &&
        (timed_seconds >= kBudgetSeconds || e.chunks_timed >= kMaxTimed ||
         timed_cost >= kMaxShare * total_cost || cost * timed_seconds / timed_cost > kMaxChunkSeconds))
      break;
    const auto t0 = std::chrono::steady_clock::now();
    const ChunkResult r = compute_chunk(probe_scenario, probe);
    (void)r;
    timed_seconds += std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
    timed_cost += cost;
    ++e.chunks_timed;
  }
  e.calibration_seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  // One thread's rate, spread over the threads (the run scales ~linearly
  // with threads up to the cores: 2.16x on 2 in scripts/bench), never over
  // more threads than the machine has.
  const double parallel = std::min<double>(e.threads, hw);
  e.seconds = (timed_cost > 0 ? total_cost * timed_seconds / timed_cost / parallel : 0) +
              e.cube_bytes * kAssemblySecondsPerByte;
  return e;
}

double steady_seconds() {
  return std::chrono::duration<double>(std::chrono::steady_clock::now().time_since_epoch()).count();
}

double WorkEstimate::cost(int n) const {
  return seconds_at_ref * std::pow(static_cast<double>(n) / static_cast<double>(ref_n), exponent);
}

void WorkEstimate::add(const WorkEstimate& other) {
  seconds += other.seconds;
  calibration_seconds += other.calibration_seconds;
  probes += other.probes;
  largest_probe = std::max(largest_probe, other.largest_probe);
  threads = other.threads;
}

WorkEstimate estimate_per_n(std::span<const int> ns, int threads, const std::function<void(int)>& step,
                            double extra_seconds, const Clock& clock) {
  // Probe budget and the share of the estimate the probes may take (as in
  // estimate_run); a step under kMinTimed seconds is repeated up to
  // kMaxRepeats times so that timer noise does not dominate.
  constexpr double kPerNBudget = 0.5, kPerNShare = 0.02, kMinTimed = 2e-4;
  constexpr int kMaxRepeats = 1000;
  WorkEstimate e;
  const unsigned hw = std::max(1u, std::thread::hardware_concurrency());
  e.threads = threads > 0 ? threads : static_cast<int>(hw);
  const double parallel = std::min<double>(e.threads, hw);
  if (ns.empty()) {
    e.seconds = extra_seconds / parallel;
    return e;
  }
  struct Probe {
    int n;
    double seconds;
  };
  std::vector<Probe> probes;
  auto per_n_sum = [&](double at_ref, int ref, double b) {
    double sum = 0;
    for (int n : ns) sum += at_ref * std::pow(static_cast<double>(n) / ref, b);
    return sum;
  };
  const double start = clock();
  std::size_t i = 0;
  while (true) {
    const int n = ns[i];
    int repeats = 0;
    const double t0 = clock();
    double took = 0;
    do {
      step(n);
      ++repeats;
      took = clock() - t0;
    } while (took < kMinTimed && repeats < kMaxRepeats);
    probes.push_back({n, took / repeats});
    if (i + 1 == ns.size()) break;
    // The next n: about four times this one (the last n at most).
    const auto next = std::lower_bound(ns.begin() + static_cast<std::ptrdiff_t>(i) + 1, ns.end(),
                                       static_cast<std::int64_t>(n) * 4 > INT32_MAX ? INT32_MAX : n * 4);
    const std::size_t j = next == ns.end() ? ns.size() - 1 : static_cast<std::size_t>(next - ns.begin());
    const double spent = clock() - start;
    const double predicted = probes.back().seconds * std::pow(static_cast<double>(ns[j]) / n, 2.0);
    if (spent + predicted > kPerNBudget) break;
    if (spent > kPerNShare * per_n_sum(probes.back().seconds, n, 1.0)) break;
    i = j;
  }
  e.calibration_seconds = clock() - start;
  e.probes = probes.size();
  const Probe& last = probes.back();
  e.largest_probe = last.n;
  e.ref_n = last.n;
  e.seconds_at_ref = last.seconds;
  if (probes.size() >= 2) {
    const Probe& before = probes[probes.size() - 2];
    if (before.seconds > 0 && last.seconds > 0 && last.n > before.n)
      e.exponent = std::clamp(
          std::log(last.seconds / before.seconds) / std::log(static_cast<double>(last.n) / before.n), 0.0,
          3.0);
  }
  e.seconds = (per_n_sum(e.seconds_at_ref, e.ref_n, e.exponent) + extra_seconds) / parallel;
  return e;
}

std::string duration_words(double s) {
  if (s < 1) return "under a second";
  if (s < 90) return fmt::format("about {:.0f} s", s);
  if (s < 5400) return fmt::format("about {:.0f} min", s / 60);
  if (s < 3 * 86400) return fmt::format("about {:.1f} h", s / 3600);
  return fmt::format("about {:.0f} days", s / 86400);
}

std::string size_words(double b) {
  if (b < 1e3) return fmt::format("{:.0f} bytes", b);
  if (b < 1e6) return fmt::format("{:.0f} kB", b / 1e3);
  if (b < 1e9) return fmt::format("{:.0f} MB", b / 1e6);
  if (b < 1e12) return fmt::format("{:.1f} GB", b / 1e9);
  return fmt::format("{:.1f} TB", b / 1e12);
}

}  // namespace covergrid::engine
