#include "covergrid/engine/audit.hpp"

#include "covergrid/engine/binomial_window.hpp"
#include "covergrid/engine/error.hpp"
#include "covergrid/engine/exact.hpp"
#include "covergrid/engine/interval_table.hpp"
#include "covergrid/engine/monte_carlo.hpp"
#include "covergrid/engine/random.hpp"
#include "covergrid/methods/numerics.hpp"

#include <oneapi/tbb/parallel_for.h>
#include <oneapi/tbb/task_arena.h>

#include <algorithm>
#include <cmath>
#include <limits>

namespace covergrid::engine {

const char* outcome_name(Outcome o) {
  switch (o) {
    case Outcome::holds:
      return "holds";
    case Outcome::refuted:
      return "refuted";
    case Outcome::inconclusive:
      return "inconclusive";
  }
  return "?";
}

namespace {

std::string percent_text(double confidence) {
  std::string s = std::to_string(100 * confidence);
  s.erase(s.find_last_not_of('0') + 1);
  if (!s.empty() && s.back() == '.') s.pop_back();
  return s;
}

std::string fmt_correction(std::size_t cells, double confidence) {
  return "Clopper-Pearson bounds per cell at level 1 - alpha/" + std::to_string(cells) +
         " (Bonferroni over " + std::to_string(cells) + " cells; " + percent_text(confidence) +
         " % simultaneous)";
}

std::string fmt_mean_correction(std::size_t ns, double confidence) {
  return "normal bounds on each n's mean over the p points at level 1 - alpha/" + std::to_string(ns) +
         " (Bonferroni over " + std::to_string(ns) + " n; " + percent_text(confidence) + " % simultaneous)";
}

/// Runs body(i) for i in [0, count) on `threads` workers (0 = all).
template <class F>
void for_each_index(std::size_t count, int threads, F body) {
  tbb::task_arena arena(threads > 0 ? threads : tbb::task_arena::automatic);
  arena.execute([&] { tbb::parallel_for(std::size_t{0}, count, [&](std::size_t i) { body(i); }); });
}

/// Coverage and misses just beside p (the side the infimum is approached
/// from), by direct summation. The offset 2e-12 steps past endpoints that
/// coverage_infimum merged (1e-12) into the covered set of that side.
std::array<double, 3> metrics_beside(const IntervalTable& t, const SamplingModel& model, double p, int from,
                                     double p_lo, double p_hi) {
  const double q = std::clamp(p + from * 2e-12, p_lo, p_hi);
  double cov = 0, low = 0, high = 0;
  for (int x = 0; x <= t.n; ++x) {
    const std::size_t i = static_cast<std::size_t>(x);
    const double w = model.pmf(x, t.n, q);
    if (t.upper[i] < q)
      low += w;
    else if (t.lower[i] > q)
      high += w;
    else
      cov += w;
  }
  return {cov, low, high};
}

struct ExactRow {
  InfimumResult inf;
  double mean = 0, mean_low = 0, mean_high = 0;
  BelowMeasure below;
};

/// One n of an exact claim: everything the verdict reads.
ExactRow exact_row(const Claim& c, int n) {
  const double t = c.threshold() - coverage_decision_slack;
  const IntervalTable table =
      build_table(*c.method.method, n, c.level, c.side, c.method.label, c.model->design());
  ExactRow r;
  if (c.kind == ClaimKind::minimum) {
    r.inf = coverage_infimum(table, c.p_lo, c.p_hi, -HUGE_VAL, *c.model);
  } else {
    r.mean = coverage_uniform_mean(table, c.p_lo, c.p_hi, *c.model);
    const auto m = miss_uniform_means(table, c.p_lo, c.p_hi, *c.model);
    r.mean_low = m[0];
    r.mean_high = m[1];
  }
  r.below = coverage_measure_below(table, c.p_lo, c.p_hi, t, *c.model);
  return r;
}

Verdict audit_exact(const Claim& c, int threads, const AuditProgressFn& progress) {
  Verdict v;
  v.threshold = c.threshold();
  v.n_count = c.n.size();
  const double t = v.threshold - coverage_decision_slack;
  std::vector<ExactRow> rows(c.n.size());
  for_each_index(c.n.size(), threads, [&](std::size_t i) {
    rows[i] = exact_row(c, c.n[i]);
    if (progress) progress(c.n[i]);
  });
  std::size_t worst = 0;
  double share = 0;
  for (std::size_t i = 0; i < rows.size(); ++i) {
    const double value = c.kind == ClaimKind::minimum ? rows[i].inf.value : rows[i].mean;
    const double best = c.kind == ClaimKind::minimum ? rows[worst].inf.value : rows[worst].mean;
    if (value < best) worst = i;
    if (value < t) ++v.n_below;
    v.refined |= rows[i].inf.refined;
    v.share_approximate |= rows[i].below.approximate;
    share += c.p_hi > c.p_lo ? rows[i].below.measure / (c.p_hi - c.p_lo) : (value < t ? 1.0 : 0.0);
  }
  v.share_below = share / static_cast<double>(rows.size());
  v.worst_n = c.n[worst];
  if (c.kind == ClaimKind::minimum) {
    const InfimumResult& w = rows[worst].inf;
    v.worst_p = w.where;
    v.worst_from = w.from;
    v.worst_coverage = w.value;
    const IntervalTable table =
        build_table(*c.method.method, v.worst_n, c.level, c.side, c.method.label, c.model->design());
    const auto m = metrics_beside(table, *c.model, w.where, w.from, c.p_lo, c.p_hi);
    v.worst_miss_low = m[1];
    v.worst_miss_high = m[2];
  } else {
    v.worst_p = std::numeric_limits<double>::quiet_NaN();
    v.worst_coverage = rows[worst].mean;
    v.worst_miss_low = rows[worst].mean_low;
    v.worst_miss_high = rows[worst].mean_high;
  }
  v.outcome = v.worst_coverage >= t ? Outcome::holds : Outcome::refuted;
  return v;
}

/// Clopper-Pearson bounds for k of r at two-sided level 1 - alpha.
std::array<double, 2> exact_bounds(std::uint64_t k, std::uint64_t r, double alpha) {
  const double kd = static_cast<double>(k), rd = static_cast<double>(r);
  const double lo = k == 0 ? 0.0 : methods::beta_quantile(kd, rd - kd + 1, alpha / 2);
  const double hi = k == r ? 1.0 : methods::beta_quantile_upper(kd + 1, rd - kd, alpha / 2);
  return {lo, hi};
}

struct SimCell {
  double coverage = 0, miss_low = 0, miss_high = 0;
  std::uint64_t covered = 0;
};

/// The p points of a simulated claim: p_points equally spaced across the
/// range (one point for a single p).
std::vector<double> sim_points(const Claim& c) {
  const std::size_t points = c.p_hi > c.p_lo ? std::max<std::size_t>(c.p_points, 2) : 1;
  std::vector<double> ps(points);
  for (std::size_t j = 0; j < points; ++j)
    ps[j] = j + 1 == points
                ? c.p_hi
                : c.p_lo + (c.p_hi - c.p_lo) * static_cast<double>(j) / static_cast<double>(points - 1);
  return ps;
}

/// One n of a simulated claim: `replicates` draws at each p point into
/// out[0 .. ps.size()).
void simulate_row(const Claim& c, int n, const std::vector<double>& ps, std::uint64_t replicates,
                  SimCell* out) {
  const IntervalTable table =
      build_table(*c.method.method, n, c.level, c.side, c.method.label, c.model->design());
  const std::vector<const IntervalTable*> tables = {&table};
  ProbabilityWindow window;
  CellDraws draws;
  for (std::size_t j = 0; j < ps.size(); ++j) {
    const double p = c.model->attainable(ps[j]);  // a finite population's K/N
    c.model->window(n, p, window);
    const CellStream stream(c.seed, 0, static_cast<std::uint32_t>(n), static_cast<std::uint32_t>(j));
    const auto clusters = cluster_sampler_for(*c.model, n, p, tables);
    simulate_cell(window, stream, ReplicateRule{replicates, 0, 0}, tables, p, draws, clusters.get());
    const McMetrics m = mc_metrics(table, window, draws, p);
    SimCell& cell = out[j];
    cell.coverage = m[index(Metric::coverage)];
    cell.miss_low = m[index(Metric::miss_low)];
    cell.miss_high = m[index(Metric::miss_high)];
    cell.covered = static_cast<std::uint64_t>(std::llround(cell.coverage * static_cast<double>(replicates)));
  }
}

Verdict audit_simulated(const Claim& c, int threads, const AuditProgressFn& progress) {
  Verdict v;
  v.simulated = true;
  v.threshold = c.threshold();
  v.replicates = c.replicates;
  v.n_count = c.n.size();
  const double t = v.threshold;
  const std::vector<double> ps = sim_points(c);
  const std::size_t points = ps.size();
  std::vector<SimCell> cells(c.n.size() * points);
  for_each_index(c.n.size(), threads, [&](std::size_t i) {
    simulate_row(c, c.n[i], ps, c.replicates, &cells[i * points]);
    if (progress) progress(c.n[i]);
  });
  const double alpha = 1.0 - c.confidence;
  const double r = static_cast<double>(c.replicates);
  auto need = [&](double estimate, double se_at_one, double z) -> std::uint64_t {
    // Replicates at which z * se would equal the distance to the threshold
    // (an estimate): se scales as 1/sqrt(R); se_at_one is se * sqrt(R).
    const double gap = std::fabs(estimate - t);
    if (gap <= 0 || se_at_one <= 0) return 0;
    return static_cast<std::uint64_t>(std::ceil(std::pow(z * se_at_one / gap, 2)));
  };
  std::size_t worst = 0;
  if (c.kind == ClaimKind::minimum) {
    v.cells = cells.size();
    const double cell_alpha = alpha / static_cast<double>(cells.size());
    v.correction = fmt_correction(cells.size(), c.confidence);
    bool all_above = true, any_below = false;
    std::size_t deciding = 0;
    double deciding_key = HUGE_VAL;
    std::vector<char> n_below(c.n.size(), 0);
    std::size_t cells_below = 0;
    std::uint64_t to_decide = 0;
    bool undecidable = false;
    std::vector<std::array<double, 2>> bounds(cells.size());
    for (std::size_t k = 0; k < cells.size(); ++k) {
      bounds[k] = exact_bounds(cells[k].covered, c.replicates, cell_alpha);
      if (cells[k].coverage < cells[worst].coverage) worst = k;
      if (bounds[k][1] < t) {
        any_below = true;
        ++cells_below;
        n_below[k / points] = 1;
      }
      if (bounds[k][0] < t) all_above = false;
    }
    for (std::size_t k = 0; k < cells.size(); ++k) {
      const bool straddles = bounds[k][0] < t && bounds[k][1] >= t;
      double key = HUGE_VAL;
      if (any_below)
        key = bounds[k][1] < t ? bounds[k][1] : HUGE_VAL;  // the most clearly refuting cell
      else if (all_above)
        key = bounds[k][0];  // the closest call among cells that hold
      else if (straddles) {
        key = cells[k].coverage;
        // The bound's half-width on the threshold's side shrinks as 1/sqrt(R):
        // the replicates at which it would just clear the threshold.
        const double est = cells[k].coverage;
        const double half = est > t ? est - bounds[k][0] : bounds[k][1] - est;
        const std::uint64_t rk = need(est, half * std::sqrt(r), 1.0);
        if (rk == 0) undecidable = true;
        to_decide = std::max(to_decide, rk);
      }
      if (key < deciding_key) {
        deciding_key = key;
        deciding = k;
      }
    }
    v.outcome = any_below ? Outcome::refuted : all_above ? Outcome::holds : Outcome::inconclusive;
    if (v.outcome == Outcome::inconclusive) v.replicates_to_decide = undecidable ? 0 : to_decide;
    v.lower_bound = bounds[deciding][0];
    v.upper_bound = bounds[deciding][1];
    v.share_below = static_cast<double>(cells_below) / static_cast<double>(cells.size());
    v.n_below = static_cast<std::size_t>(std::count(n_below.begin(), n_below.end(), 1));
    v.worst_n = c.n[worst / points];
    v.worst_p = ps[worst % points];
    v.worst_coverage = cells[worst].coverage;
    v.worst_miss_low = cells[worst].miss_low;
    v.worst_miss_high = cells[worst].miss_high;
    return v;
  }
  // Mean claim: per n, the mean over the p points, with a normal bound.
  v.cells = cells.size();
  const double n_alpha = alpha / static_cast<double>(c.n.size());
  const double z = methods::z_upper(n_alpha / 2);
  v.correction = fmt_mean_correction(c.n.size(), c.confidence);
  std::vector<std::array<double, 4>> per_n(c.n.size());  // mean, se, low, high
  bool all_above = true, any_below = false;
  for (std::size_t i = 0; i < c.n.size(); ++i) {
    double sum = 0, var = 0, low = 0, high = 0;
    for (std::size_t j = 0; j < points; ++j) {
      const SimCell& cell = cells[i * points + j];
      sum += cell.coverage;
      var += cell.coverage * (1 - cell.coverage) / r;
      low += cell.miss_low;
      high += cell.miss_high;
    }
    const double k = static_cast<double>(points);
    const double mean = sum / k, se = std::sqrt(var) / k;
    per_n[i] = {mean, se, low / k, high / k};
    if (mean + z * se < t) {
      any_below = true;
      ++v.n_below;
    }
    if (mean - z * se < t) all_above = false;
    if (mean < per_n[worst][0]) worst = i;
  }
  std::size_t deciding = worst;
  std::uint64_t to_decide = 0;
  bool undecidable = false;
  for (std::size_t i = 0; i < c.n.size(); ++i) {
    const double mean = per_n[i][0], se = per_n[i][1];
    if (any_below) {
      if (mean + z * se < t && mean + z * se < per_n[deciding][0] + z * per_n[deciding][1]) deciding = i;
    } else if (all_above) {
      if (mean - z * se < per_n[deciding][0] - z * per_n[deciding][1]) deciding = i;
    } else if (mean - z * se < t && mean + z * se >= t) {
      const std::uint64_t ri = need(mean, se * std::sqrt(r), z);
      if (ri == 0) undecidable = true;
      to_decide = std::max(to_decide, ri);
    }
  }
  v.outcome = any_below ? Outcome::refuted : all_above ? Outcome::holds : Outcome::inconclusive;
  if (v.outcome == Outcome::inconclusive) v.replicates_to_decide = undecidable ? 0 : to_decide;
  v.lower_bound = per_n[deciding][0] - z * per_n[deciding][1];
  v.upper_bound = per_n[deciding][0] + z * per_n[deciding][1];
  v.worst_n = c.n[worst];
  v.worst_p = std::numeric_limits<double>::quiet_NaN();
  v.worst_coverage = per_n[worst][0];
  v.worst_miss_low = per_n[worst][2];
  v.worst_miss_high = per_n[worst][3];
  std::size_t below_cells = 0;
  for (const auto& cell : cells) below_cells += cell.coverage < t;
  v.share_below = static_cast<double>(below_cells) / static_cast<double>(cells.size());
  v.share_approximate = true;  // point estimates, not bounds
  return v;
}

}  // namespace

Verdict audit_claim(const Claim& c, int threads, const AuditProgressFn& progress) {
  const std::string where = c.name.empty() ? "claim" : "claim " + c.name;
  if (!c.method.method) throw InputError(where, "names no method");
  if (!c.method.method->supports(c.side))
    throw InputError(where,
                     c.method.label + " does not define the side " + std::string(methods::side_name(c.side)));
  if (c.n.empty()) throw InputError(where, "has no n");
  if (!(c.p_lo >= 0 && c.p_hi <= 1 && c.p_lo <= c.p_hi))
    throw InputError(where, "its p range is not inside [0, 1]");
  if (!(c.tolerance >= 0)) throw InputError(where, "tolerance must not be negative");
  if (c.replicates == 0) return audit_exact(c, threads, progress);
  Verdict v = audit_simulated(c, threads, progress);
  // Claims are binomial, whose coverage has exact sums: an inconclusive
  // simulation is settled at once by the exact engine, and the output says so
  // instead of only asking for more replicates. (A model without exact sums
  // would skip this.)
  if (v.outcome == Outcome::inconclusive) {
    const Verdict e = audit_exact(c, threads, {});
    v.exact_decided = true;
    v.exact_outcome = e.outcome;
    v.exact_worst_n = e.worst_n;
    v.exact_worst_p = e.worst_p;
    v.exact_worst_coverage = e.worst_coverage;
  }
  return v;
}

WorkEstimate estimate_audit(const Claim& c, int threads) {
  if (!c.method.method || c.n.empty()) return estimate_per_n({}, threads, [](int) {});
  if (c.replicates == 0) return estimate_per_n(c.n, threads, [&](int n) { (void)exact_row(c, n); });
  // Probes draw at most kProbeReplicates per cell; the replicates beyond
  // them are costed per draw on one cell at the claim's middle n.
  constexpr std::uint64_t kProbeReplicates = 64;
  const std::vector<double> ps = sim_points(c);
  std::vector<SimCell> row(ps.size());
  const std::uint64_t probe = std::min(c.replicates, kProbeReplicates);
  double extra = 0;
  if (c.replicates > probe) {
    const int n = c.n[c.n.size() / 2];
    const std::vector<double> mid = {ps[ps.size() / 2]};
    ProbabilityWindow window;
    c.model->window(n, mid[0], window);
    const IntervalTable table =
        build_table(*c.method.method, n, c.level, c.side, c.method.label, c.model->design());
    const std::vector<const IntervalTable*> tables = {&table};
    CellDraws draws;
    const auto clusters = cluster_sampler_for(*c.model, n, mid[0], tables);
    std::uint64_t drawn = 0;
    const double t0 = steady_seconds();
    double took = 0;
    for (std::uint32_t k = 0; took < 0.02 && drawn < c.replicates; ++k) {
      const CellStream stream(c.seed, 1, static_cast<std::uint32_t>(n), k);
      const std::uint64_t r = std::min<std::uint64_t>(c.replicates - drawn, 4096);
      simulate_cell(window, stream, ReplicateRule{r, 0, 0}, tables, mid[0], draws, clusters.get());
      drawn += r;
      took = steady_seconds() - t0;
    }
    extra = took / static_cast<double>(drawn) * static_cast<double>(c.replicates - probe) *
            static_cast<double>(ps.size() * c.n.size());
  }
  return estimate_per_n(
      c.n, threads, [&](int n) { simulate_row(c, n, ps, probe, row.data()); }, extra);
}

}  // namespace covergrid::engine
