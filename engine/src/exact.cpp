#include "covergrid/engine/exact.hpp"

#include "exact_points.hpp"

#include "covergrid/methods/numerics.hpp"

#include <boost/math/tools/minima.hpp>

#include <algorithm>
#include <array>
#include <cstdint>
#include <cmath>
#include <limits>
#include <set>
#include <stdexcept>
#include <string>
#include <vector>

namespace covergrid::engine {

namespace {
constexpr double nan = std::numeric_limits<double>::quiet_NaN();
constexpr double endpoint_merge_tolerance = 1e-12;
}  // namespace

namespace {

/// Width mean and standard deviation over the window, accumulated around a
/// shift (the width at the window's middle) so that the variance does not cancel.
void width_moments(const double* width, const double* w, std::size_t size, CellMetrics& m) {
  const double shift = width[size / 2];
  double s1 = 0, s2 = 0;
  for (std::size_t i = 0; i < size; ++i) {
    const double d = width[i] - shift;
    s1 += w[i] * d;
    s2 += w[i] * d * d;
  }
  m[index(Metric::width)] = shift + s1;
  m[index(Metric::width_sd)] = std::sqrt(std::max(0.0, s2 - s1 * s1));
}

double sparse_mass(const std::vector<int>& xs, const ProbabilityWindow& window) {
  double sum = 0;
  for (int x : xs)
    if (x >= window.lo && x <= window.hi) sum += window.w[static_cast<std::size_t>(x - window.lo)];
  return sum;
}

}  // namespace

CellMetrics exact_metrics_scan(const IntervalTable& table, const ProbabilityWindow& window, double p) {
  CellMetrics m;
  if (!table.supported) {
    m.fill(nan);
    return m;
  }
  const double* lower = table.lower.data() + window.lo;
  const double* upper = table.upper.data() + window.lo;
  const double* w = window.w.data();
  const std::size_t size = window.w.size();
  double cov = 0, below = 0, above = 0;
  for (std::size_t i = 0; i < size; ++i) {
    const double wi = w[i];
    cov += (lower[i] <= p && p <= upper[i]) ? wi : 0.0;
    below += upper[i] < p ? wi : 0.0;
    above += lower[i] > p ? wi : 0.0;
  }
  m[index(Metric::coverage)] = cov;
  m[index(Metric::miss_low)] = below;
  m[index(Metric::miss_high)] = above;
  width_moments(table.width.data() + window.lo, w, size, m);
  m[index(Metric::degenerate)] = sparse_mass(table.degenerate_x, window);
  m[index(Metric::overshoot)] = sparse_mass(table.overshoot_x, window);
  return m;
}

CellMetrics exact_metrics(const IntervalTable& table, const ProbabilityWindow& window, double p) {
  if (!table.supported || !table.monotone) return exact_metrics_scan(table, window, p);
  CellMetrics m;
  const double* lower = table.lower.data() + window.lo;
  const double* upper = table.upper.data() + window.lo;
  const std::size_t size = window.w.size();
  // First x with U_x >= p and one past the last x with L_x <= p.
  const std::size_t a = static_cast<std::size_t>(std::lower_bound(upper, upper + size, p) - upper);
  const std::size_t b1 = static_cast<std::size_t>(std::upper_bound(lower, lower + size, p) - lower);
  const double* cum = window.cum.data();
  m[index(Metric::miss_low)] = cum[a];
  m[index(Metric::coverage)] = b1 > a ? cum[b1] - cum[a] : 0.0;
  m[index(Metric::miss_high)] = cum[size] - cum[std::max(a, b1)];
  width_moments(table.width.data() + window.lo, window.w.data(), size, m);
  m[index(Metric::degenerate)] = sparse_mass(table.degenerate_x, window);
  m[index(Metric::overshoot)] = sparse_mass(table.overshoot_x, window);
  return m;
}

namespace {

/// The width moments of G tables over one window, their sums interleaved so
/// that each table's chain of additions (in exact_metrics' own order) runs
/// beside the others instead of after them.
template <std::size_t G>
void width_moments_group(const double* const* width, const double* w, std::size_t size,
                         CellMetrics* const* out) {
  std::array<double, G> shift, s1{}, s2{};
  for (std::size_t k = 0; k < G; ++k) shift[k] = width[k][size / 2];
  for (std::size_t i = 0; i < size; ++i) {
    const double wi = w[i];
    for (std::size_t k = 0; k < G; ++k) {
      const double d = width[k][i] - shift[k];
      s1[k] += wi * d;
      s2[k] += wi * d * d;
    }
  }
  for (std::size_t k = 0; k < G; ++k) {
    (*out[k])[index(Metric::width)] = shift[k] + s1[k];
    (*out[k])[index(Metric::width_sd)] = std::sqrt(std::max(0.0, s2[k] - s1[k] * s1[k]));
  }
}

/// The first element of a sorted array not before p, walked from a previous
/// answer: lower_bound (elements < p come before) or, `strict`, upper_bound
/// (elements <= p come before).
std::size_t walk_to(const double* v, std::size_t size, std::size_t at, double p, bool strict) {
  auto before = [&](double e) { return strict ? e <= p : e < p; };
  at = std::min(at, size);
  while (at > 0 && !before(v[at - 1])) --at;
  while (at < size && before(v[at])) ++at;
  return at;
}

}  // namespace

void exact_metrics_cell(const IntervalTable* const* tables, std::size_t count,
                        const ProbabilityWindow& window, double p, RunCursor* cursors, CellMetrics* out) {
  // Up to 6 tables a pass (12 running sums: as many as the registers hold
  // beside the loads), in groups of about equal size.
  constexpr std::size_t most = 6;
  std::size_t fast = 0;
  for (std::size_t c = 0; c < count; ++c) fast += tables[c]->supported && tables[c]->monotone ? 1 : 0;
  const std::size_t group =
      fast == 0 ? 1 : (fast + (fast + most - 1) / most - 1) / ((fast + most - 1) / most);
  const double* widths[most];
  CellMetrics* outs[most];
  std::size_t pending = 0;
  const std::size_t size = window.w.size(), lo = static_cast<std::size_t>(window.lo);
  const double* w = window.w.data();
  auto flush = [&] {
    switch (pending) {
      case 6:
        width_moments_group<6>(widths, w, size, outs);
        break;
      case 5:
        width_moments_group<5>(widths, w, size, outs);
        break;
      case 4:
        width_moments_group<4>(widths, w, size, outs);
        break;
      case 3:
        width_moments_group<3>(widths, w, size, outs);
        break;
      case 2:
        width_moments_group<2>(widths, w, size, outs);
        break;
      case 1:
        width_moments_group<1>(widths, w, size, outs);
        break;
      default:
        break;
    }
    pending = 0;
  };
  const double* cum = window.cum.data();
  for (std::size_t c = 0; c < count; ++c) {
    const IntervalTable& table = *tables[c];
    if (!table.supported || !table.monotone) {
      out[c] = exact_metrics_scan(table, window, p);
      continue;
    }
    // The same a and b1 as exact_metrics' searches within the window: the
    // searches over all x, clamped to it (the limits are sorted).
    const std::size_t all = table.upper.size();
    RunCursor& cur = cursors[c];
    cur.first_up = walk_to(table.upper.data(), all, cur.first_up, p, false);
    cur.past_low = walk_to(table.lower.data(), all, cur.past_low, p, true);
    const std::size_t a = std::clamp(cur.first_up, lo, lo + size) - lo;
    const std::size_t b1 = std::clamp(cur.past_low, lo, lo + size) - lo;
    CellMetrics& m = out[c];
    m[index(Metric::miss_low)] = cum[a];
    m[index(Metric::coverage)] = b1 > a ? cum[b1] - cum[a] : 0.0;
    m[index(Metric::miss_high)] = cum[size] - cum[std::max(a, b1)];
    m[index(Metric::degenerate)] = sparse_mass(table.degenerate_x, window);
    m[index(Metric::overshoot)] = sparse_mass(table.overshoot_x, window);
    widths[pending] = table.width.data() + lo;
    outs[pending] = &m;
    if (++pending == group) flush();
  }
  flush();
}

double coverage_by_enumeration(const IntervalTable& table, double p, const SamplingModel& model) {
  if (!table.supported) return nan;
  p = model.attainable(p);
  double cov = 0;
  for (int x = 0; x <= table.n; ++x) {
    const std::size_t i = static_cast<std::size_t>(x);
    if (table.lower[i] <= p && p <= table.upper[i]) cov += model.pmf(x, table.n, p);
  }
  return cov;
}

double run_probability(int a, int b, int n, double p) {
  if (a > b) return 0.0;
  if (const auto sum = binomial_run_sum(a, b, n, p)) return *sum;
  return 1.0 - methods::binomial_cdf(a - 1, n, p) - methods::binomial_sf(b, n, p);
}

namespace {

/// The covered set during the sweep: membership per x and the positions
/// where membership changes (boundaries), so contiguity is "two boundaries".
class CoveredSet {
 public:
  explicit CoveredSet(int n) : in_(static_cast<std::size_t>(n) + 1, 0), n_(n) {}
  void set(int x, bool value) {
    if (static_cast<bool>(in_[static_cast<std::size_t>(x)]) == value) return;
    in_[static_cast<std::size_t>(x)] = value;
    toggle(x);      // boundary between x-1 and x
    toggle(x + 1);  // boundary between x and x+1
  }
  bool contiguous() const { return boundaries_.size() <= 2; }
  bool empty() const { return boundaries_.empty(); }
  int first() const { return *boundaries_.begin(); }
  int last() const { return *boundaries_.rbegin() - 1; }
  bool contains(int x) const { return in_[static_cast<std::size_t>(x)] != 0; }
  int n() const { return n_; }

 private:
  void toggle(int position) {
    const auto it = boundaries_.find(position);
    if (it == boundaries_.end())
      boundaries_.insert(position);
    else
      boundaries_.erase(it);
  }
  std::vector<char> in_;
  std::set<int> boundaries_;
  int n_;
};

double set_probability(const CoveredSet& s, double p, const SamplingModel& model) {
  if (s.empty()) return 0.0;
  if (s.contiguous()) return model.run_probability(s.first(), s.last(), s.n(), p);
  double sum = 0;
  for (int x = 0; x <= s.n(); ++x)
    if (s.contains(x)) sum += model.pmf(x, s.n(), p);
  return sum;
}

}  // namespace

InfimumResult coverage_infimum(const IntervalTable& table, double p_lo, double p_hi, double stop_below,
                               const SamplingModel& model) {
  InfimumResult best;
  if (!table.supported) return {nan, nan, 0, false};
  if (model.lattice() > 0) return detail::lattice_infimum(table, p_lo, p_hi, stop_below, model);
  const int n = table.n;
  // Endpoints strictly inside the range, each with what happens there.
  struct Event {
    double p;
    int x;
    bool enters;  // true at L_x (x joins just at p), false at U_x (x leaves just after p)
  };
  std::vector<Event> events;
  events.reserve(2 * static_cast<std::size_t>(n) + 2);
  CoveredSet covered(n);
  // The covered set just above p_lo: L_x <= p_lo < U_x, or L_x <= p_lo and
  // U_x == p_lo handled below as an endpoint at the range start.
  for (int x = 0; x <= n; ++x) {
    const std::size_t i = static_cast<std::size_t>(x);
    const double l = table.lower[i], u = table.upper[i];
    if (l <= p_lo && u > p_lo) covered.set(x, true);
    if (l > p_lo && l < p_hi) events.push_back({l, x, true});
    if (u > p_lo && u < p_hi && u >= l) events.push_back({u, x, false});
  }
  std::sort(events.begin(), events.end(), [](const Event& a, const Event& b) { return a.p < b.p; });

  best.value = std::numeric_limits<double>::infinity();
  auto consider = [&](double value, double where, int from) {
    if (value < best.value) best = {value, where, from, best.refined, value < stop_below};
  };
  // The point value at p_lo itself (a closed range includes it).
  {
    double at = 0;
    for (int x = 0; x <= n; ++x) {
      const std::size_t i = static_cast<std::size_t>(x);
      if (table.lower[i] <= p_lo && p_lo <= table.upper[i]) at += model.pmf(x, n, p_lo);
    }
    consider(at, p_lo, 0);
  }
  if (p_hi <= p_lo || best.stopped) return best;

  // Within a segment the minimum is at an end, as a one-sided limit. Where
  // only entries happen at an endpoint the limit from below is the smaller
  // one (coverage jumps up), where only exits happen the limit from above;
  // so each endpoint needs one evaluation (two where both happen).
  auto refine = [&](double a, double b) {
    best.refined = true;
    constexpr int points = 33;
    for (int i = 0; i < points; ++i) {
      const double t = a + (b - a) * i / (points - 1);
      consider(set_probability(covered, t, model), t, i == 0 ? +1 : (i == points - 1 ? -1 : 0));
    }
  };
  // A segment's ends decide it only for a contiguous run of a model whose
  // runs are unimodal in p; otherwise the segment is searched densely.
  const bool unimodal = model.unimodal_runs();
  auto ends_decide = [&] { return unimodal && covered.contiguous(); };
  double left = p_lo;
  if (ends_decide()) consider(set_probability(covered, p_lo, model), p_lo, +1);
  std::size_t e = 0;
  while (e < events.size()) {
    // Endpoints closer than endpoint_merge_tolerance are one event: limits are
    // only computed to about 1e-12 (the root-finding tolerance), and methods
    // such as Blaker's have U(x) = L(x') exactly in theory; a rounding gap
    // between them must not count as a dip in coverage.
    const double at = events[e].p;
    std::size_t group_end = e;
    bool entries = false, exits = false;
    while (group_end < events.size() && events[group_end].p <= at + endpoint_merge_tolerance) {
      (events[group_end].enters ? entries : exits) = true;
      ++group_end;
    }
    const double last = events[group_end - 1].p;
    if (!ends_decide())
      refine(left, at);
    else if (entries)
      consider(set_probability(covered, at, model), at, -1);
    // Entries first (an x that also leaves within the group never joins), then exits.
    for (std::size_t g = e; g < group_end; ++g)
      if (events[g].enters && table.upper[static_cast<std::size_t>(events[g].x)] > last)
        covered.set(events[g].x, true);
    for (std::size_t g = e; g < group_end; ++g)
      if (!events[g].enters) covered.set(events[g].x, false);
    if (exits && ends_decide()) consider(set_probability(covered, last, model), last, +1);
    e = group_end;
    left = last;
    if (best.stopped) return best;
  }
  if (!ends_decide())
    refine(left, p_hi);
  else
    consider(set_probability(covered, p_hi, model), p_hi, -1);
  // The point value at p_hi (included in the closed range).
  {
    double at = 0;
    for (int x = 0; x <= n; ++x) {
      const std::size_t i = static_cast<std::size_t>(x);
      if (table.lower[i] <= p_hi && p_hi <= table.upper[i]) at += model.pmf(x, n, p_hi);
    }
    consider(at, p_hi, 0);
  }
  return best;
}

double beta_mass(int x, int n, double a, double b) {
  if (b <= a) return 0.0;
  const double s = x + 1.0, t = n - x + 1.0;
  const double mean = s / (s + t);
  if (b <= mean) return methods::beta_cdf(s, t, b) - methods::beta_cdf(s, t, a);
  if (a >= mean) return methods::beta_ccdf(s, t, a) - methods::beta_ccdf(s, t, b);
  return 1.0 - methods::beta_cdf(s, t, a) - methods::beta_ccdf(s, t, b);
}

namespace {

/// The model's closed-form mass of x over [a, b] (see uniform_mass).
double uniform_mass_of(const SamplingModel& model, int x, int n, double a, double b) {
  if (b <= a) return 0.0;
  const auto m = model.uniform_mass(x, n, a, b);
  if (!m)
    throw std::logic_error("the " + std::string(model.kind()) + " model has no closed-form mass over p");
  return *m;
}

}  // namespace

namespace {

/// True when the model gives the mass of x over a p-range in closed form
/// (asked over an empty range, which costs a closed form nothing).
bool has_closed_mass(const SamplingModel& model, int n) {
  return model.uniform_mass(0, n, 0.0, 0.0).has_value();
}

}  // namespace

double coverage_uniform_mean(const IntervalTable& table, double p_lo, double p_hi,
                             const SamplingModel& model) {
  if (!table.supported) return nan;
  if (model.lattice() > 0) return detail::lattice_means(table, p_lo, p_hi, model)[0];
  const int n = table.n;
  if (p_hi <= p_lo) return coverage_by_enumeration(table, p_lo, model);
  if (!has_closed_mass(model, n)) return detail::quadrature_means(table, p_lo, p_hi, model)[0];
  double sum = 0;
  for (int x = 0; x <= n; ++x) {
    const std::size_t i = static_cast<std::size_t>(x);
    sum += uniform_mass_of(model, x, n, std::max(table.lower[i], p_lo), std::min(table.upper[i], p_hi));
  }
  return sum / (model.mass_scale(n) * (p_hi - p_lo));
}

std::array<double, 2> miss_uniform_means(const IntervalTable& table, double p_lo, double p_hi,
                                         const SamplingModel& model) {
  if (!table.supported) return {nan, nan};
  if (model.lattice() > 0) {
    const auto means = detail::lattice_means(table, p_lo, p_hi, model);
    return {means[1], means[2]};
  }
  const int n = table.n;
  if (p_hi <= p_lo) {
    double low = 0, high = 0;
    for (int x = 0; x <= n; ++x) {
      const std::size_t i = static_cast<std::size_t>(x);
      if (table.upper[i] < p_lo) low += model.pmf(x, n, p_lo);
      if (table.lower[i] > p_lo) high += model.pmf(x, n, p_lo);
    }
    return {low, high};
  }
  if (!has_closed_mass(model, n)) {
    const auto means = detail::quadrature_means(table, p_lo, p_hi, model);
    return {means[1], means[2]};
  }
  double low = 0, high = 0;
  for (int x = 0; x <= n; ++x) {
    const std::size_t i = static_cast<std::size_t>(x);
    low += uniform_mass_of(model, x, n, std::max(table.upper[i], p_lo), p_hi);   // U_x < p
    high += uniform_mass_of(model, x, n, p_lo, std::min(table.lower[i], p_hi));  // L_x > p
  }
  const double scale = model.mass_scale(n) * (p_hi - p_lo);
  return {low / scale, high / scale};
}

namespace {

/// The measure of {p in [a, b] : f(p) < threshold} for f unimodal on [a, b]
/// (so {f >= threshold} is one interval): nothing when both ends are at or
/// above it, else the crossings by TOMS 748, with Brent's method for the
/// maximum where both ends are below.
template <class F>
double unimodal_measure_below(F f, double a, double b, double threshold) {
  const double fa = f(a), fb = f(b);
  if (fa >= threshold && fb >= threshold) return 0.0;  // f >= min(fa, fb) on [a, b]
  auto g = [&](double p) { return f(p) - threshold; };
  if (fa < threshold && fb < threshold) {
    const auto top = boost::math::tools::brent_find_minima([&](double p) { return -f(p); }, a, b, 52);
    if (-top.second < threshold) return b - a;
    return (methods::solve_bracketed(g, a, top.first, "coverage crossing") - a) +
           (b - methods::solve_bracketed(g, top.first, b, "coverage crossing"));
  }
  if (fa < threshold) return methods::solve_bracketed(g, a, b, "coverage crossing") - a;
  return b - methods::solve_bracketed(g, a, b, "coverage crossing");
}

}  // namespace

BelowMeasure coverage_measure_below(const IntervalTable& table, double p_lo, double p_hi, double threshold,
                                    const SamplingModel& model) {
  BelowMeasure out;
  if (!table.supported) return {nan, false};
  const int n = table.n;
  if (p_hi <= p_lo) {
    out.measure = 0;  // a single point has measure zero
    return out;
  }
  if (model.lattice() > 0) {
    out.measure = detail::lattice_measure_below(table, p_lo, p_hi, threshold, model);
    return out;
  }
  std::vector<double> cuts;
  cuts.reserve(2 * static_cast<std::size_t>(n) + 4);
  cuts.push_back(p_lo);
  for (int x = 0; x <= n; ++x) {
    const std::size_t i = static_cast<std::size_t>(x);
    for (double e : {table.lower[i], table.upper[i]})
      if (e > p_lo && e < p_hi) cuts.push_back(e);
  }
  cuts.push_back(p_hi);
  std::sort(cuts.begin(), cuts.end());
  // Merge endpoints closer than the limits' precision (as coverage_infimum does).
  std::vector<double> ends;
  ends.reserve(cuts.size());
  for (double c : cuts)
    if (ends.empty() || c > ends.back() + endpoint_merge_tolerance) ends.push_back(c);
  if (ends.back() < p_hi) ends.back() = p_hi;

  for (std::size_t k = 0; k + 1 < ends.size(); ++k) {
    const double a = ends[k], b = ends[k + 1];
    const double mid = 0.5 * (a + b);
    // The covered run on the segment's interior: by binary search for
    // monotone tables, else by a scan (which may find gaps).
    int first = 1, last = 0;  // empty
    CoveredSet covered(table.monotone ? 0 : n);
    if (table.monotone) {
      const auto* lo = table.lower.data();
      const auto* up = table.upper.data();
      const std::size_t size = table.lower.size();
      first = static_cast<int>(std::lower_bound(up, up + size, mid) - up);     // first U_x >= mid
      last = static_cast<int>(std::upper_bound(lo, lo + size, mid) - lo) - 1;  // last L_x <= mid
    } else {
      for (int x = 0; x <= n; ++x) {
        const std::size_t i = static_cast<std::size_t>(x);
        if (table.lower[i] <= mid && mid <= table.upper[i]) covered.set(x, true);
      }
      if (covered.contiguous() && !covered.empty()) {
        first = covered.first();
        last = covered.last();
      }
    }
    const bool run = table.monotone || covered.contiguous();
    auto coverage_at = [&](double p) {
      return run ? model.run_probability(first, last, n, p) : set_probability(covered, p, model);
    };
    if (run && model.unimodal_runs()) {
      out.measure += unimodal_measure_below(coverage_at, a, b, threshold);
    } else {
      // A covered set with gaps, or a run of a model not known to be
      // unimodal, need not be unimodal in p: sampled, and flagged.
      out.approximate = true;
      constexpr int points = 65;
      int below = 0;
      for (int i = 0; i < points; ++i)
        if (coverage_at(a + (b - a) * (i + 0.5) / points) < threshold) ++below;
      out.measure += (b - a) * below / points;
    }
  }
  return out;
}

}  // namespace covergrid::engine
