#include "covergrid/engine/binomial_window.hpp"

#include "covergrid/methods/numerics.hpp"

#include <algorithm>
#include <cmath>

namespace covergrid::engine {

namespace {

/// 1/k for k = 0..size-1 (entry 0 unused), per thread: the ratio recurrence
/// then needs no division per term, which was most of the window's cost.
/// Grown on demand up to 2^20 entries (8 MiB); beyond that we divide.
constexpr std::size_t reciprocal_limit = std::size_t{1} << 20;
const std::vector<double>& reciprocals(std::size_t need) {
  thread_local std::vector<double> inv{0.0};
  if (inv.size() < need && need <= reciprocal_limit) {
    const std::size_t old = inv.size();
    inv.resize(std::max(need, std::min(reciprocal_limit, 2 * old)));
    for (std::size_t k = old; k < inv.size(); ++k) inv[k] = 1.0 / static_cast<double>(k);
  }
  return inv;
}

}  // namespace

void fill_binomial_window(int n, double p, ProbabilityWindow& out) {
  auto& w = out.w;
  int& lo = out.lo;
  int& hi = out.hi;
  w.clear();
  out.tail_bound = 2 * tail_bound_per_side;
  if (p <= 0.0 || p >= 1.0) {
    lo = hi = (p <= 0.0 ? 0 : n);
    w.push_back(1.0);
    out.sum_up();
    return;
  }
  const double q = 1.0 - p;
  const double odds = p / q, inv_odds = q / p;
  const int mode = std::clamp(static_cast<int>(std::floor((n + 1.0) * p)), 0, n);
  const double at_mode = methods::binomial_pmf(mode, n, p);
  const std::vector<double>& inv = reciprocals(static_cast<std::size_t>(n) + 2);
  const bool table = inv.size() >= static_cast<std::size_t>(n) + 2;
  auto one_over = [&](int k) { return table ? inv[static_cast<std::size_t>(k)] : 1.0 / k; };

  // Lower side first (into a scratch buffer, nearest the mode first). Each
  // side stops when the geometric bound term * s / (1 - s) on the rest is
  // within the per-side bound, tested as term * s <= bound * (1 - s).
  thread_local std::vector<double> down;
  down.clear();
  double term = at_mode;
  int k = mode;
  while (k > 0) {
    const double s = k * inv_odds * one_over(n - k + 1);
    if (s < 1.0 && term * s <= tail_bound_per_side * (1.0 - s)) break;
    term *= s;
    --k;
    down.push_back(term);
  }
  lo = k;
  w.assign(down.rbegin(), down.rend());
  w.push_back(at_mode);
  term = at_mode;
  k = mode;
  while (k < n) {
    const double r = (n - k) * odds * one_over(k + 1);
    if (r < 1.0 && term * r <= tail_bound_per_side * (1.0 - r)) break;
    term *= r;
    ++k;
    w.push_back(term);
  }
  hi = k;
  out.sum_up();
}

}  // namespace covergrid::engine
