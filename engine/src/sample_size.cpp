#include "covergrid/engine/sample_size.hpp"

#include "covergrid/engine/binomial_window.hpp"
#include "covergrid/engine/error.hpp"
#include "covergrid/engine/exact.hpp"
#include "covergrid/engine/interval_table.hpp"

#include <boost/math/tools/minima.hpp>
#include <oneapi/tbb/parallel_for.h>
#include <oneapi/tbb/task_arena.h>

#include <algorithm>
#include <cmath>

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

double largest_margin(const IntervalTable& t, Side side) {
  double m = 0;
  for (int x = 0; x <= t.n; ++x) {
    const std::size_t i = static_cast<std::size_t>(x);
    m = std::max(m, margin_of_error(t.lower[i], t.upper[i], x, t.n, side));
  }
  return m;
}

double expected_width(const IntervalTable& t, BinomialWindow& window, double p) {
  window.fill(t.n, p);
  double sum = 0;
  for (std::size_t i = 0; i < window.w.size(); ++i)
    sum += window.w[i] * t.width[static_cast<std::size_t>(window.lo) + i];
  return sum;
}

}  // namespace

std::pair<double, double> max_expected_width(const IntervalTable& t, double p_lo, double p_hi) {
  BinomialWindow window;
  if (p_hi <= p_lo) return {expected_width(t, window, p_lo), p_lo};
  constexpr int points = 129;
  int best = 0;
  double best_value = -1;
  for (int i = 0; i < points; ++i) {
    const double p = i + 1 == points ? p_hi : p_lo + (p_hi - p_lo) * i / (points - 1);
    const double w = expected_width(t, window, p);
    if (w > best_value) {
      best_value = w;
      best = i;
    }
  }
  const double step = (p_hi - p_lo) / (points - 1);
  const double a = std::max(p_lo, p_lo + (best - 1) * step), b = std::min(p_hi, p_lo + (best + 1) * step);
  const auto r = boost::math::tools::brent_find_minima(
      [&](double p) { return -expected_width(t, window, p); }, a, b, 40);
  if (-r.second > best_value) return {-r.second, r.first};
  return {best_value, p_lo + best * step};
}

PlanFigures plan_figures(const PlanRequest& q, int n) {
  const IntervalTable t = build_table(*q.method.method, n, q.level, q.side);
  PlanFigures f;
  f.n = n;
  const InfimumResult inf = coverage_infimum(t, q.p_lo, q.p_hi);
  f.inf_coverage = inf.value;
  f.inf_coverage_p = inf.where;
  f.mean_coverage = coverage_uniform_mean(t, q.p_lo, q.p_hi);
  const auto w = max_expected_width(t, q.p_lo, q.p_hi);
  f.max_width = w.first;
  f.max_width_p = w.second;
  f.max_margin = largest_margin(t, q.side);
  return f;
}

bool plan_meets(const PlanRequest& q, int n) {
  // Decisions only (the figures reported come from plan_figures): a method
  // with x <-> n - x symmetry has a mirrored table and, two-sided over a range
  // symmetric about 1/2, coverage and expected width symmetric in p, so half
  // the range decides (its mean equals the whole range's mean). The
  // registry's invariant tests hold every method that declares symmetry to it.
  const IntervalTable t = build_table_mirrored(*q.method.method, n, q.level, q.side);
  const bool halve = q.side == Side::two_sided && q.method.method->symmetric() &&
                     std::fabs(q.p_lo + q.p_hi - 1.0) <= 1e-12 && q.p_lo < 0.5;
  const double hi = halve ? 0.5 : q.p_hi;
  // Cheapest first: the margin needs only the table.
  for (const auto& [r, value] : q.requirements)
    if (r == Requirement::max_margin && largest_margin(t, q.side) > value) return false;
  for (const auto& [r, value] : q.requirements) {
    switch (r) {
      case Requirement::max_margin:
        break;
      case Requirement::min_coverage:
        if (coverage_infimum(t, q.p_lo, hi, value - coverage_decision_slack).value <
            value - coverage_decision_slack)
          return false;
        break;
      case Requirement::mean_coverage:
        if (coverage_uniform_mean(t, q.p_lo, hi) < value - coverage_decision_slack) return false;
        break;
      case Requirement::max_width:
        if (max_expected_width(t, q.p_lo, hi).first > value) return false;
        break;
    }
  }
  return true;
}

PlanResult plan_sample_size(const PlanRequest& q, int threads) {
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
  auto evaluate = [&](int lo, int hi) {  // n in [lo, hi], in parallel
    arena.execute([&] {
      tbb::parallel_for(lo, hi + 1, [&](int n) {
        if (at(n) < 0) at(n) = plan_meets(q, n) ? 1 : 0;
      });
    });
  };
  // Downwards from n_to to the largest n that fails: every n above it meets.
  int last_failure = q.n_from - 1;  // none yet
  for (int hi = q.n_to; hi >= q.n_from && last_failure < q.n_from; hi -= block) {
    const int lo = std::max(q.n_from, hi - block + 1);
    evaluate(lo, hi);
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
    evaluate(lo, hi);
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
  return out;
}

}  // namespace covergrid::engine
