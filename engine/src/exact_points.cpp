// The exact engine's point-wise paths (exact.cpp's coverage_infimum, the
// uniform means and the measure below call them): models on a lattice (a
// finite population's K/N) and models without a closed-form mass over p.
#include "exact_points.hpp"

#include <boost/math/quadrature/gauss.hpp>

#include <algorithm>
#include <cmath>
#include <limits>
#include <vector>

namespace covergrid::engine::detail {

namespace {

constexpr double nan = std::numeric_limits<double>::quiet_NaN();

// Models whose true proportion takes only the values k/L (a finite
// population, SamplingModel::lattice() = L). Over a p-range the worst case is
// a minimum over those points, the uniform mean their average, and the
// measure below a threshold the range's length times the share of points
// below it. Each point's coverage is summed over its probability window.

/// The lattice indices k with p_lo <= k/L <= p_hi (empty when first > last).
struct LatticeRange {
  std::int64_t first, last;
  std::int64_t count() const { return last >= first ? last - first + 1 : 0; }
};

LatticeRange lattice_range(double lattice, double p_lo, double p_hi) {
  const auto at = [&](std::int64_t k) { return static_cast<double>(k) / lattice; };
  const auto top = static_cast<std::int64_t>(lattice);
  auto first = std::clamp<std::int64_t>(static_cast<std::int64_t>(std::ceil(p_lo * lattice)), 0, top);
  while (first > 0 && at(first - 1) >= p_lo) --first;
  while (first <= top && at(first) < p_lo) ++first;
  auto last = std::clamp<std::int64_t>(static_cast<std::int64_t>(std::floor(p_hi * lattice)), 0, top);
  while (last < top && at(last + 1) <= p_hi) ++last;
  while (last >= 0 && at(last) > p_hi) --last;
  return {first, last};
}

}  // namespace

std::array<double, 3> point_probabilities(const IntervalTable& table, double p, const SamplingModel& model,
                                          ProbabilityWindow& window) {
  model.window(table.n, p, window);
  double cov = 0, low = 0, high = 0;
  for (int x = window.lo; x <= window.hi; ++x) {
    const std::size_t i = static_cast<std::size_t>(x);
    const double w = window.w[static_cast<std::size_t>(x - window.lo)];
    if (table.upper[i] < p)
      low += w;
    else if (table.lower[i] > p)
      high += w;
    else
      cov += w;
  }
  return {cov, low, high};
}

/// Every point of a range whose count is at most this is evaluated; beyond
/// it a regular subsample of this many (flagged as refined / approximate).
constexpr std::int64_t lattice_point_limit = 1000000;

InfimumResult lattice_infimum(const IntervalTable& table, double p_lo, double p_hi, double stop_below,
                              const SamplingModel& model) {
  const double lattice = model.lattice();
  const LatticeRange range = lattice_range(lattice, p_lo, p_hi);
  InfimumResult best{std::numeric_limits<double>::infinity(), nan, 0, false, false};
  if (range.count() == 0) return {nan, nan, 0, false, false};
  // A monotone table's covered set is a run at every p, and the model's runs
  // are unimodal over the points: only the first and last point between two
  // consecutive endpoints (and points on an endpoint) can be the minimum.
  std::vector<std::int64_t> points;
  if (table.monotone && model.unimodal_runs()) {
    points = {range.first, range.last};
    for (const auto* limits : {&table.lower, &table.upper})
      for (double e : *limits) {
        if (e < p_lo || e > p_hi) continue;
        const auto f = static_cast<std::int64_t>(std::floor(e * lattice));
        for (std::int64_t k = f - 1; k <= f + 2; ++k)
          if (k >= range.first && k <= range.last) points.push_back(k);
      }
    std::sort(points.begin(), points.end());
    points.erase(std::unique(points.begin(), points.end()), points.end());
  } else {
    const std::int64_t stride = (range.count() + lattice_point_limit - 1) / lattice_point_limit;
    best.refined = stride > 1;
    for (std::int64_t k = range.first; k <= range.last; k += stride) points.push_back(k);
    if (points.back() != range.last) points.push_back(range.last);
  }
  ProbabilityWindow window;
  for (std::int64_t k : points) {
    const double p = static_cast<double>(k) / lattice;
    const double value = point_probabilities(table, p, model, window)[0];
    if (value < best.value) {
      best.value = value;
      best.where = p;
      best.from = 0;
      best.stopped = value < stop_below;
      if (best.stopped) break;
    }
  }
  return best;
}

/// Means over the points of [p_lo, p_hi]: coverage, miss low, miss high.
std::array<double, 3> lattice_means(const IntervalTable& table, double p_lo, double p_hi,
                                    const SamplingModel& model) {
  const LatticeRange range = lattice_range(model.lattice(), p_lo, p_hi);
  if (range.count() == 0) return {nan, nan, nan};
  ProbabilityWindow window;
  std::array<double, 3> sum{0, 0, 0};
  for (std::int64_t k = range.first; k <= range.last; ++k) {
    const auto v = point_probabilities(table, static_cast<double>(k) / model.lattice(), model, window);
    for (std::size_t i = 0; i < 3; ++i) sum[i] += v[i];
  }
  for (double& v : sum) v /= static_cast<double>(range.count());
  return sum;
}

double lattice_measure_below(const IntervalTable& table, double p_lo, double p_hi, double threshold,
                             const SamplingModel& model) {
  const LatticeRange range = lattice_range(model.lattice(), p_lo, p_hi);
  if (range.count() == 0) return 0.0;
  ProbabilityWindow window;
  std::int64_t below = 0;
  for (std::int64_t k = range.first; k <= range.last; ++k)
    if (point_probabilities(table, static_cast<double>(k) / model.lattice(), model, window)[0] < threshold)
      ++below;
  return (p_hi - p_lo) * static_cast<double>(below) / static_cast<double>(range.count());
}

/// For models with neither a lattice nor a closed-form mass (the
/// beta-binomial): the means over p uniform on [p_lo, p_hi] of P(covered),
/// P(U < p) and P(L > p), by 15-point Gauss-Legendre quadrature
/// (Boost.Math's nodes and weights) on each segment between consecutive
/// interval endpoints. Within a segment the covered and missed sets are
/// fixed, so each integrand is a finite sum of the model's point
/// probabilities, smooth in p; the tests hold the rule to the binomial's
/// closed form within 1e-10. Costs 15 windows per segment.
std::array<double, 3> quadrature_means(const IntervalTable& table, double p_lo, double p_hi,
                                       const SamplingModel& model) {
  std::vector<double> ends = {p_lo, p_hi};
  for (const auto* limits : {&table.lower, &table.upper})
    for (double e : *limits)
      if (e > p_lo && e < p_hi) ends.push_back(e);
  std::sort(ends.begin(), ends.end());
  ends.erase(std::unique(ends.begin(), ends.end()), ends.end());
  using rule = boost::math::quadrature::gauss<double, 15>;
  const auto& nodes = rule::abscissa();
  const auto& weights = rule::weights();
  ProbabilityWindow window;
  std::array<double, 3> sum{0, 0, 0};
  for (std::size_t k = 0; k + 1 < ends.size(); ++k) {
    const double centre = 0.5 * (ends[k] + ends[k + 1]), half = 0.5 * (ends[k + 1] - ends[k]);
    for (std::size_t i = 0; i < nodes.size(); ++i)
      for (const double sign : {-1.0, 1.0}) {
        if (nodes[i] == 0 && sign > 0) continue;  // the middle node, once
        const auto v = point_probabilities(table, centre + sign * half * nodes[i], model, window);
        for (std::size_t j = 0; j < 3; ++j) sum[j] += half * weights[i] * v[j];
      }
  }
  for (double& v : sum) v /= p_hi - p_lo;
  return sum;
}

}  // namespace covergrid::engine::detail
