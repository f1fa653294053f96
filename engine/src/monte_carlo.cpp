#include "covergrid/engine/monte_carlo.hpp"

#include "covergrid/engine/sampler.hpp"

#include <algorithm>
#include <cmath>
#include <limits>

namespace covergrid::engine {

namespace {

constexpr std::size_t uniform_block = 4096;

void draw_range(const WindowSampler& sampler, const ProbabilityWindow& window, const CellStream& stream,
                std::uint64_t first, std::uint64_t count, std::vector<std::uint64_t>& counts) {
  thread_local std::vector<double> u(uniform_block);
  for (std::uint64_t done = 0; done < count; done += uniform_block) {
    const std::size_t k = static_cast<std::size_t>(std::min<std::uint64_t>(uniform_block, count - done));
    stream.uniforms(first + done, k, u.data());
    for (std::size_t i = 0; i < k; ++i) ++counts[static_cast<std::size_t>(sampler.draw(u[i]) - window.lo)];
  }
}

double covered_count(const IntervalTable& t, const ProbabilityWindow& window, const CellDraws& d, double p) {
  double k = 0;
  for (std::size_t i = 0; i < d.counts.size(); ++i) {
    const std::size_t x = static_cast<std::size_t>(window.lo) + i;
    if (t.lower[x] <= p && p <= t.upper[x]) k += static_cast<double>(d.counts[i]);
  }
  return k;
}

}  // namespace

void simulate_cell(const ProbabilityWindow& window, const CellStream& stream, const ReplicateRule& rule,
                   const std::vector<const IntervalTable*>& tables, double p, CellDraws& draws) {
  draws.counts.assign(window.w.size(), 0);
  draws.replicates = 0;
  if (rule.replicates == 0) return;
  WindowSampler sampler;
  sampler.build(window);
  std::uint64_t target = rule.replicates;
  for (;;) {
    draw_range(sampler, window, stream, draws.replicates, target - draws.replicates, draws.counts);
    draws.replicates = target;
    if (rule.target_se <= 0 || draws.replicates >= rule.max_replicates) return;
    double worst = 0;
    const double r = static_cast<double>(draws.replicates);
    for (const IntervalTable* t : tables) {
      if (!t->supported) continue;
      const double c = (covered_count(*t, window, draws, p) + 1) / (r + 2);
      worst = std::max(worst, std::sqrt(c * (1 - c) / r));
    }
    if (worst <= rule.target_se) return;
    target = std::min(rule.max_replicates, 2 * draws.replicates);
  }
}

McMetrics mc_metrics(const IntervalTable& t, const ProbabilityWindow& window, const CellDraws& d, double p) {
  McMetrics m;
  if (!t.supported || d.replicates == 0) {
    m.fill(std::numeric_limits<double>::quiet_NaN());
    return m;
  }
  double cov = 0, below = 0, above = 0, s1 = 0, s2 = 0, deg = 0, over = 0;
  const std::size_t mid = static_cast<std::size_t>(window.lo) + d.counts.size() / 2;
  const double shift = t.width[mid];
  for (std::size_t i = 0; i < d.counts.size(); ++i) {
    if (d.counts[i] == 0) continue;
    const double h = static_cast<double>(d.counts[i]);
    const std::size_t x = static_cast<std::size_t>(window.lo) + i;
    cov += (t.lower[x] <= p && p <= t.upper[x]) ? h : 0.0;
    below += t.upper[x] < p ? h : 0.0;
    above += t.lower[x] > p ? h : 0.0;
    const double dw = t.width[x] - shift;
    s1 += h * dw;
    s2 += h * dw * dw;
    deg += h * t.degenerate[x];
    over += h * t.overshoot[x];
  }
  const double r = static_cast<double>(d.replicates);
  const double c = cov / r;
  m[0] = c;
  m[1] = below / r;
  m[2] = above / r;
  m[3] = shift + s1 / r;
  m[4] = std::sqrt(std::max(0.0, s2 / r - (s1 / r) * (s1 / r)));
  m[5] = deg / r;
  m[6] = over / r;
  m[7] = std::sqrt(c * (1 - c) / r);
  return m;
}

}  // namespace covergrid::engine

namespace covergrid::engine {

PairedCell paired_difference(std::uint64_t seed, std::size_t model, int n, std::size_t p_index, double p,
                             std::uint64_t replicates, const IntervalTable& a, const IntervalTable& b,
                             const SamplingModel& sampling) {
  ProbabilityWindow window;
  sampling.window(n, p, window);
  const CellStream stream(seed, static_cast<std::uint32_t>(model), static_cast<std::uint32_t>(n),
                          static_cast<std::uint32_t>(p_index));
  CellDraws draws;
  simulate_cell(window, stream, ReplicateRule{replicates, 0, 0}, {}, p, draws);
  PairedCell out;
  out.replicates = draws.replicates;
  double both = 0, only_a = 0, only_b = 0;
  for (std::size_t i = 0; i < draws.counts.size(); ++i) {
    const std::size_t x = static_cast<std::size_t>(window.lo) + i;
    const bool ca = a.lower[x] <= p && p <= a.upper[x], cb = b.lower[x] <= p && p <= b.upper[x];
    const double h = static_cast<double>(draws.counts[i]);
    if (ca && cb)
      both += h;
    else if (ca)
      only_a += h;
    else if (cb)
      only_b += h;
  }
  const double r = static_cast<double>(draws.replicates);
  out.coverage_a = mc_metrics(a, window, draws, p)[0];
  out.coverage_b = mc_metrics(b, window, draws, p)[0];
  out.difference = (only_a - only_b) / r;
  out.difference_se = std::sqrt(std::max(0.0, (only_a + only_b) / r - out.difference * out.difference) / r);
  return out;
}

}  // namespace covergrid::engine
