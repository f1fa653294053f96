// The sample-size search: per-n decisions (cheap proofs first, then the
// exact figures on a mirrored table), scanned from both ends of the range in
// parallel blocks of n.
#include "covergrid/engine/sample_size.hpp"

#include "covergrid/engine/binomial_window.hpp"
#include "covergrid/engine/coverage_rule.hpp"
#include "covergrid/engine/error.hpp"
#include "covergrid/engine/exact.hpp"
#include "covergrid/engine/interval_table.hpp"

#include <boost/math/tools/minima.hpp>
#include <oneapi/tbb/parallel_for.h>
#include <oneapi/tbb/task_arena.h>

#include <algorithm>
#include <numeric>
#include <cmath>
#include <string>
#include <tuple>

namespace covergrid::engine {

const char* requirement_name(Requirement r) {
  switch (r) {
    case Requirement::min_coverage:
      return "min-coverage";
    case Requirement::mean_coverage:
      return "mean-coverage";
    case Requirement::max_width:
      return "max-width";
    case Requirement::max_margin:
      return "max-margin";
  }
  return "?";
}

double margin_of_error(double lower, double upper, int x, int n, Side side) {
  const double estimate = static_cast<double>(x) / n;
  switch (side) {
    case Side::two_sided:
      return 0.5 * (upper - lower);
    case Side::lower_bound:
      return std::max(0.0, estimate - lower);
    case Side::upper_bound:
      return std::max(0.0, upper - estimate);
  }
  return 0;
}

namespace {

/// The first zero-width x of the table and how many there are.
std::pair<int, int> zero_widths(const IntervalTable& t) {
  int first = -1, count = 0;
  for (int x = 0; x <= t.n; ++x)
    if (t.width[static_cast<std::size_t>(x)] <= zero_width_tolerance) {
      if (first < 0) first = x;
      ++count;
    }
  return {first, count};
}

bool has_requirement(const PlanRequest& q, Requirement r) {
  return std::any_of(q.requirements.begin(), q.requirements.end(),
                     [&](const auto& req) { return req.first == r; });
}

double largest_margin(const IntervalTable& t, Side side) {
  double m = 0;
  for (int x = 0; x <= t.n; ++x) {
    const std::size_t i = static_cast<std::size_t>(x);
    m = std::max(m, margin_of_error(t.lower[i], t.upper[i], x, t.n, side));
  }
  return m;
}

double expected_width(const IntervalTable& t, const SamplingModel& model, ProbabilityWindow& window,
                      double p) {
  model.window(t.n, p, window);
  double sum = 0;
  for (std::size_t i = 0; i < window.w.size(); ++i)
    sum += window.w[i] * t.width[static_cast<std::size_t>(window.lo) + i];
  return sum;
}

}  // namespace

std::pair<double, double> max_expected_width(const IntervalTable& t, double p_lo, double p_hi,
                                             const SamplingModel& model) {
  ProbabilityWindow window;
  if (p_hi <= p_lo) return {expected_width(t, model, window, p_lo), p_lo};
  constexpr int points = 129;
  int best = 0;
  double best_value = -1;
  for (int i = 0; i < points; ++i) {
    const double p = i + 1 == points ? p_hi : p_lo + (p_hi - p_lo) * i / (points - 1);
    const double w = expected_width(t, model, window, p);
    if (w > best_value) {
      best_value = w;
      best = i;
    }
  }
  const double step = (p_hi - p_lo) / (points - 1);
  const double a = std::max(p_lo, p_lo + (best - 1) * step), b = std::min(p_hi, p_lo + (best + 1) * step);
  const auto r = boost::math::tools::brent_find_minima(
      [&](double p) { return -expected_width(t, model, window, p); }, a, b, 40);
  if (-r.second > best_value) return {-r.second, r.first};
  return {best_value, p_lo + best * step};
}

double coverage_warning_depth(double level) { return (1.0 - level) / 5.0; }

bool coverage_far_below(const PlanFigures& f, double level) {
  return !meets_coverage(f.inf_coverage, level - coverage_warning_depth(level));
}

double closed_form_max_margin(const PlanRequest& q, int n) {
  if (!q.method.entry) return -1;
  const std::string& id = q.method.entry->info.id;
  if (!(id == "wald-half" || (id == "wilson" && q.side == Side::two_sided))) return -1;
  double best = 0;
  for (int x : {n / 2, (n + 1) / 2}) {
    const methods::Limits l = named_interval(*q.method.method, x, n, q.level, q.side, q.method.label);
    // One-sided bounds have a fixed end at 0 or 1 by definition; only the
    // computed end must be unclipped for the argument to hold.
    const bool clipped = (q.side != Side::upper_bound && l.raw_lower < 0.0) ||
                         (q.side != Side::lower_bound && l.raw_upper > 1.0);
    if (clipped) return -1;
    best = std::max(best, margin_of_error(l.lower, l.upper, x, n, q.side));
  }
  return best;
}

PlanFigures plan_figures(const PlanRequest& q, int n) {
  const IntervalTable t =
      build_table(*q.method.method, n, q.level, q.side, q.method.label, q.model->design());
  PlanFigures f;
  f.n = n;
  const InfimumResult inf = coverage_infimum(t, q.p_lo, q.p_hi, -HUGE_VAL, *q.model);
  f.inf_coverage = inf.value;
  f.inf_coverage_p = inf.where;
  f.mean_coverage = coverage_uniform_mean(t, q.p_lo, q.p_hi, *q.model);
  const auto w = max_expected_width(t, q.p_lo, q.p_hi, *q.model);
  f.max_width = w.first;
  f.max_width_p = w.second;
  f.max_margin = largest_margin(t, q.side);
  std::tie(f.zero_width_x, f.zero_width_count) = zero_widths(t);
  return f;
}

bool coverage_guaranteed(const PlanRequest& q) {
  if (!q.method.entry || q.method.entry->info.id != "clopper-pearson") return false;
  return std::all_of(q.requirements.begin(), q.requirements.end(), [&](const auto& r) {
    return (r.first == Requirement::min_coverage || r.first == Requirement::mean_coverage) &&
           r.second <= q.level;
  });
}

bool plan_meets(const PlanRequest& q, int n) {
  // A proof that holds at every n: Clopper-Pearson's coverage is at least
  // its level at every n and p (each tail misses with probability at most its
  // share of alpha), so the infimum and the mean meet any threshold up to it.
  if (coverage_guaranteed(q)) return true;
  const bool margin = has_requirement(q, Requirement::max_margin);
  const bool precision = margin || has_requirement(q, Requirement::max_width);
  if (precision) {
    // Proofs of failure from single intervals, before any table: a zero-width
    // interval at x = 0 or x = n, or a margin above the bound at the middle x
    // (the largest margin is at least any one x's).
    for (int x : {0, n, n / 2, (n + 1) / 2}) {
      const methods::Limits l = named_interval(*q.method.method, x, n, q.level, q.side, q.method.label);
      if (l.upper - l.lower <= zero_width_tolerance) return false;
      for (const auto& [r, value] : q.requirements)
        if (r == Requirement::max_margin && margin_of_error(l.lower, l.upper, x, n, q.side) > value)
          return false;
    }
  }
  if (margin && q.requirements.size() == 1) {
    const double closed = closed_form_max_margin(q, n);
    if (closed >= 0) return closed <= q.requirements.front().second;
  }
  // Decisions only (the figures reported come from plan_figures): a method
  // with x <-> n - x symmetry has a mirrored table and, two-sided over a range
  // symmetric about 1/2, coverage and expected width symmetric in p, so half
  // the range decides (its mean equals the whole range's mean). The
  // registry's invariant tests hold every method that declares symmetry to it.
  const IntervalTable t =
      build_table_mirrored(*q.method.method, n, q.level, q.side, q.method.label, q.model->design());
  if (precision && zero_widths(t).first >= 0) return false;
  const bool halve = q.side == Side::two_sided && q.method.method->symmetric() &&
                     std::fabs(q.p_lo + q.p_hi - 1.0) <= 1e-12 && q.p_lo < 0.5;
  const double hi = halve ? 0.5 : q.p_hi;
  // Cheapest first: the margin needs only the table, the width 129 window
  // sums and a short Brent search, the infimum (which stops at the first
  // value below) and the mean an incomplete beta function per endpoint.
  for (Requirement kind : {Requirement::max_margin, Requirement::max_width, Requirement::min_coverage,
                           Requirement::mean_coverage})
    for (const auto& [r, value] : q.requirements) {
      if (r != kind) continue;
      switch (r) {
        case Requirement::max_margin:
          if (largest_margin(t, q.side) > value) return false;
          break;
        case Requirement::max_width:
          if (max_expected_width(t, q.p_lo, hi, *q.model).first > value) return false;
          break;
        case Requirement::min_coverage:
          if (!meets_coverage(
                  coverage_infimum(t, q.p_lo, hi, value - coverage_decision_slack, *q.model).value, value))
            return false;
          break;
        case Requirement::mean_coverage:
          if (!meets_coverage(coverage_uniform_mean(t, q.p_lo, hi, *q.model), value)) return false;
          break;
      }
    }
  return true;
}

WorkEstimate estimate_plan(const PlanRequest& q, int threads) {
  std::vector<int> ns;
  if (q.method.method && q.n_from >= 1 && q.n_to >= q.n_from) {
    ns.resize(static_cast<std::size_t>(q.n_to - q.n_from) + 1);
    std::iota(ns.begin(), ns.end(), q.n_from);
  }
  return estimate_per_n(ns, threads, [&](int n) { (void)plan_meets(q, n); });
}

PlanResult plan_sample_size(const PlanRequest& q, int threads, const PlanProgressFn& progress) {
  if (!q.method.method) throw InputError("plan", "names no method");
  if (!q.method.method->supports(q.side))
    throw InputError(q.method.label, "does not define the side " + std::string(methods::side_name(q.side)));
  if (q.requirements.empty()) throw InputError("plan", "states no requirement");
  if (q.n_from < 1 || q.n_to < q.n_from) throw InputError("plan", "the n search range is empty");
  PlanResult out;
  tbb::task_arena arena(threads > 0 ? threads : tbb::task_arena::automatic);
  const int block = std::max(16, 8 * arena.max_concurrency());
  // Verdict per n of the range: -1 not evaluated, 0 fails, 1 meets.
  std::vector<signed char> known(static_cast<std::size_t>(q.n_to - q.n_from + 1), -1);
  auto at = [&](int n) -> signed char& { return known[static_cast<std::size_t>(n - q.n_from)]; };
  std::size_t decided = 0;
  auto evaluate = [&](int lo, int hi, bool downward) {  // n in [lo, hi], in parallel
    arena.execute([&] {
      tbb::parallel_for(lo, hi + 1, [&](int n) {
        if (at(n) < 0) at(n) = plan_meets(q, n) ? 1 : 0;
      });
    });
    decided = static_cast<std::size_t>(
        std::count_if(known.begin(), known.end(), [](signed char k) { return k >= 0; }));
    if (progress) progress({downward, downward ? lo : hi, decided});
  };
  // Downwards from n_to to the largest n that fails: every n above it meets.
  int last_failure = q.n_from - 1;  // none yet
  for (int hi = q.n_to; hi >= q.n_from && last_failure < q.n_from; hi -= block) {
    const int lo = std::max(q.n_from, hi - block + 1);
    evaluate(lo, hi, true);
    for (int n = hi; n >= lo; --n)
      if (at(n) == 0) {
        last_failure = n;
        break;
      }
  }
  const int stable = last_failure + 1;
  out.stable_found = stable <= q.n_to;
  // Upwards from n_from to the first n that meets; below the last failure
  // (above it every n meets, so the first is the stable n if none is found).
  int first = stable;
  for (int lo = q.n_from; lo < last_failure && first == stable; lo += block) {
    const int hi = std::min(last_failure - 1, lo + block - 1);
    evaluate(lo, hi, false);
    for (int n = lo; n <= hi; ++n)
      if (at(n) == 1) {
        first = n;
        break;
      }
  }
  for (signed char k : known) out.evaluated += k >= 0;
  out.found = first <= q.n_to;
  if (out.found) out.first = plan_figures(q, first);
  if (out.stable_found) out.stable = stable == first ? out.first : plan_figures(q, stable);
  if (!out.found) out.at_end = plan_figures(q, q.n_to);
  return out;
}

}  // namespace covergrid::engine
