#include "covergrid/engine/monte_carlo.hpp"

#include "covergrid/engine/sampler.hpp"

#include <algorithm>
#include <cmath>
#include <limits>

namespace covergrid::engine {

namespace {

constexpr std::size_t uniform_block = 4096;

void draw_range(const WindowSampler& sampler, const ProbabilityWindow& window, const CellStream& stream,
                std::uint64_t first, std::uint64_t count, CellDraws& draws, const ClusterSampler* clusters) {
  thread_local std::vector<double> u(uniform_block);
  thread_local std::vector<double> detail;
  if (clusters) detail.resize(static_cast<std::size_t>(std::max(1, clusters->clusters() - 1)));
  for (std::uint64_t done = 0; done < count; done += uniform_block) {
    const std::size_t k = static_cast<std::size_t>(std::min<std::uint64_t>(uniform_block, count - done));
    stream.uniforms(first + done, k, u.data());
    if (!clusters) {
      for (std::size_t i = 0; i < k; ++i)
        ++draws.counts[static_cast<std::size_t>(sampler.draw(u[i]) - window.lo)];
      continue;
    }
    for (std::size_t i = 0; i < k; ++i) {
      const int x = sampler.draw(u[i]);
      ++draws.counts[static_cast<std::size_t>(x - window.lo)];
      stream.detail_uniforms(first + done + i, detail.size(), detail.data());
      ++draws.samples[{x, clusters->sum_squares(x, detail.data())}];
    }
  }
}

/// Calls f(x, s, count) for each drawn sample: by (x, sum of squared cluster
/// counts) when `by_clusters` (a table that needs them, or a pair with one),
/// else by x (s = -1), so that x-only tables sum in the same order whether
/// or not the clusters were drawn.
template <class F>
void each_sample(const ProbabilityWindow& window, const CellDraws& d, bool by_clusters, F&& f) {
  if (by_clusters && !d.samples.empty()) {
    for (const auto& [key, count] : d.samples) f(key.first, key.second, count);
    return;
  }
  for (std::size_t i = 0; i < d.counts.size(); ++i)
    if (d.counts[i] != 0) f(window.lo + static_cast<int>(i), std::int64_t{-1}, d.counts[i]);
}

/// One sample's clipped limits (with the overshoot flag) under table t.
struct SampleLimits {
  double lower, upper;
  bool overshoot;
};

SampleLimits limits_of(const IntervalTable& t, const CellDraws& d, int x, std::int64_t s) {
  constexpr double nan = std::numeric_limits<double>::quiet_NaN();
  if (t.clustered) {
    if (s < 0) return {nan, nan, false};  // the clusters were not drawn: covers nothing
    const methods::Limits l = named_clustered_interval(
        t, x, methods::ClusterCounts{d.clusters, d.cluster_size, static_cast<double>(s)});
    return {l.lower, l.upper, l.raw_lower < 0.0 || l.raw_upper > 1.0};
  }
  if (!t.supported) return {nan, nan, false};
  const auto i = static_cast<std::size_t>(x);
  return {t.lower[i], t.upper[i], t.overshoot[i] != 0.0};
}

/// Whether the draws can judge table t: a supported table, or a clustered
/// one with the cluster counts drawn.
bool judged(const IntervalTable& t, const CellDraws& d) {
  return t.clustered ? !d.samples.empty() || d.replicates == 0 : t.supported;
}

double covered_count(const IntervalTable& t, const ProbabilityWindow& window, const CellDraws& d, double p) {
  double k = 0;
  each_sample(window, d, t.clustered != nullptr, [&](int x, std::int64_t s, std::uint64_t count) {
    const SampleLimits l = limits_of(t, d, x, s);
    if (l.lower <= p && p <= l.upper) k += static_cast<double>(count);
  });
  return k;
}

}  // namespace

std::unique_ptr<ClusterSampler> cluster_sampler_for(const SamplingModel& model, int n, double p,
                                                    const std::vector<const IntervalTable*>& tables) {
  const bool needed =
      std::any_of(tables.begin(), tables.end(), [](const IntervalTable* t) { return t->clustered; });
  return needed ? model.cluster_sampler(n, p) : nullptr;
}

void simulate_cell(const ProbabilityWindow& window, const CellStream& stream, const ReplicateRule& rule,
                   const std::vector<const IntervalTable*>& tables, double p, CellDraws& draws,
                   const ClusterSampler* clusters) {
  draws.counts.assign(window.w.size(), 0);
  draws.samples.clear();
  draws.replicates = 0;
  draws.clusters = clusters ? clusters->clusters() : 0;
  draws.cluster_size = clusters ? clusters->cluster_size() : 1;
  if (rule.replicates == 0) return;
  WindowSampler sampler;
  sampler.build(window);
  std::uint64_t target = rule.replicates;
  for (;;) {
    draw_range(sampler, window, stream, draws.replicates, target - draws.replicates, draws, clusters);
    draws.replicates = target;
    if (rule.target_se <= 0 || draws.replicates >= rule.max_replicates) return;
    double worst = 0;
    const double r = static_cast<double>(draws.replicates);
    for (const IntervalTable* t : tables) {
      if (!judged(*t, draws)) continue;
      const double c = (covered_count(*t, window, draws, p) + 1) / (r + 2);
      worst = std::max(worst, std::sqrt(c * (1 - c) / r));
    }
    if (worst <= rule.target_se) return;
    target = std::min(rule.max_replicates, 2 * draws.replicates);
  }
}

McMetrics mc_metrics(const IntervalTable& t, const ProbabilityWindow& window, const CellDraws& d, double p) {
  McMetrics m;
  if (!judged(t, d) || d.replicates == 0) {
    m.fill(std::numeric_limits<double>::quiet_NaN());
    return m;
  }
  double cov = 0, below = 0, above = 0, s1 = 0, s2 = 0, deg = 0, over = 0;
  // Widths are summed about a central one, for the standard deviation's sake.
  double shift = 0;
  if (t.clustered) {
    const auto& [key, count] =
        *std::next(d.samples.begin(), static_cast<std::ptrdiff_t>(d.samples.size() / 2));
    (void)count;
    const SampleLimits l = limits_of(t, d, key.first, key.second);
    shift = l.upper - l.lower;
  } else {
    shift = t.width[static_cast<std::size_t>(window.lo) + d.counts.size() / 2];
  }
  each_sample(window, d, t.clustered != nullptr, [&](int x, std::int64_t s, std::uint64_t count) {
    const double h = static_cast<double>(count);
    const SampleLimits l = limits_of(t, d, x, s);
    cov += (l.lower <= p && p <= l.upper) ? h : 0.0;
    below += l.upper < p ? h : 0.0;
    above += l.lower > p ? h : 0.0;
    const double dw = (l.upper - l.lower) - shift;
    s1 += h * dw;
    s2 += h * dw * dw;
    deg += l.upper == l.lower ? h : 0.0;
    over += l.overshoot ? h : 0.0;
  });
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
  const std::vector<const IntervalTable*> tables = {&a, &b};
  const auto clusters = cluster_sampler_for(sampling, n, p, tables);
  simulate_cell(window, stream, ReplicateRule{replicates, 0, 0}, {}, p, draws, clusters.get());
  PairedCell out;
  out.replicates = draws.replicates;
  double both = 0, only_a = 0, only_b = 0;
  each_sample(window, draws, a.clustered || b.clustered, [&](int x, std::int64_t s, std::uint64_t count) {
    const SampleLimits la = limits_of(a, draws, x, s), lb = limits_of(b, draws, x, s);
    const bool ca = la.lower <= p && p <= la.upper, cb = lb.lower <= p && p <= lb.upper;
    const double h = static_cast<double>(count);
    if (ca && cb)
      both += h;
    else if (ca)
      only_a += h;
    else if (cb)
      only_b += h;
  });
  const double r = static_cast<double>(draws.replicates);
  out.coverage_a = mc_metrics(a, window, draws, p)[0];
  out.coverage_b = mc_metrics(b, window, draws, p)[0];
  out.difference = (only_a - only_b) / r;
  out.difference_se = std::sqrt(std::max(0.0, (only_a + only_b) / r - out.difference * out.difference) / r);
  return out;
}

}  // namespace covergrid::engine
