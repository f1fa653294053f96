#include "covergrid/engine/binomial_window.hpp"

#include "covergrid/methods/numerics.hpp"

#include <algorithm>
#include <cmath>
#include <optional>

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

/// The ratios of neighbouring Bin(n, p) terms, with 1/k from the table.
struct Ratios {
  Ratios(int n_, double p)
      : n(n_),
        odds(p / (1.0 - p)),
        inv_odds((1.0 - p) / p),
        inv(reciprocals(static_cast<std::size_t>(n_) + 2)),
        table(inv.size() >= static_cast<std::size_t>(n_) + 2) {}
  double one_over(int k) const { return table ? inv[static_cast<std::size_t>(k)] : 1.0 / k; }
  double down(int k) const { return k * inv_odds * one_over(n - k + 1); }  // P(k - 1) / P(k)
  double up(int k) const { return (n - k) * odds * one_over(k + 1); }      // P(k + 1) / P(k)
  int n;
  double odds, inv_odds;
  const std::vector<double>& inv;
  bool table;  // 1/k comes from inv (n within its limit)
};

}  // namespace

void fill_binomial_window(int n, double p, ProbabilityWindow& out) {
  auto& w = out.w;
  int& lo = out.lo;
  int& hi = out.hi;
  out.tail_bound = 2 * tail_bound_per_side;
  if (p <= 0.0 || p >= 1.0) {
    lo = hi = (p <= 0.0 ? 0 : n);
    w.assign(1, 1.0);
    out.sum_up();
    return;
  }
  const Ratios ratio(n, p);
  const int mode = std::clamp(static_cast<int>(std::floor((n + 1.0) * p)), 0, n);
  const double at_mode = methods::binomial_pmf(mode, n, p);

  // Both sides are written into a scratch row indexed by x (the lower side
  // downward from the mode), then copied out with the running sums in one
  // pass: no reversal and no growth checks per term. Each side stops when the
  // geometric bound term * s / (1 - s) on the rest is within the per-side
  // bound, tested as term * s <= bound * (1 - s). The terms are made two at a
  // time, the second from the first one's parent times both ratios, so the
  // chain of products that each term waits on is half as long (the window
  // was bound by that chain's latency: `scripts/bench prototype`).
  thread_local std::vector<double> scratch;
  if (scratch.size() < static_cast<std::size_t>(n) + 1) scratch.resize(static_cast<std::size_t>(n) + 1);
  double* row = scratch.data();
  row[mode] = at_mode;
  auto ends = [](double term, double s) { return s < 1.0 && term * s <= tail_bound_per_side * (1.0 - s); };
  double term = at_mode;
  int k = mode;
  for (;;) {
    if (k == 0) break;
    const double s1 = ratio.down(k);
    if (ends(term, s1)) break;
    const double t1 = term * s1;
    row[k - 1] = t1;
    if (k == 1) {
      k = 0;
      break;
    }
    const double s2 = ratio.down(k - 1);
    if (ends(t1, s2)) {
      k -= 1;
      break;
    }
    term *= s1 * s2;
    row[k - 2] = term;
    k -= 2;
  }
  lo = k;
  term = at_mode;
  k = mode;
  for (;;) {
    if (k == n) break;
    const double r1 = ratio.up(k);
    if (ends(term, r1)) break;
    const double t1 = term * r1;
    row[k + 1] = t1;
    if (k + 1 == n) {
      k = n;
      break;
    }
    const double r2 = ratio.up(k + 1);
    if (ends(t1, r2)) {
      k += 1;
      break;
    }
    term *= r1 * r2;
    row[k + 2] = term;
    k += 2;
  }
  hi = k;
  const std::size_t size = static_cast<std::size_t>(hi - lo) + 1;
  w.resize(size);
  out.cum.resize(size + 1);
  double* cum = out.cum.data();
  const double* from = row + lo;
  // Running sums two terms at a time (the pair's sum is off the chain).
  double sum = 0;
  cum[0] = 0;
  std::size_t i = 0;
  for (; i + 2 <= size; i += 2) {
    w[i] = from[i];
    w[i + 1] = from[i + 1];
    cum[i + 1] = sum + from[i];
    sum += from[i] + from[i + 1];
    cum[i + 2] = sum;
  }
  if (i < size) {
    w[i] = from[i];
    cum[i + 1] = sum + from[i];
  }
}

std::optional<double> binomial_run_sum(int a, int b, int n, double p) {
  a = std::max(a, 0);
  b = std::min(b, n);
  if (a > b) return 0.0;
  if (a == 0 && b == n) return 1.0;
  if (p <= 0.0) return a == 0 ? 1.0 : 0.0;
  if (p >= 1.0) return b == n ? 1.0 : 0.0;
  const double q = 1.0 - p;
  // Terms beyond about 9 standard deviations of the start fall below 2^-60
  // of the sum; the run itself may be shorter.
  const double span = std::min(static_cast<double>(b - a) + 1.0, 20.0 * std::sqrt(n * p * q) + 10.0);
  if (span > 128.0) return std::nullopt;
  const Ratios ratio(n, p);
  const int mode = std::clamp(static_cast<int>(std::floor((n + 1.0) * p)), 0, n);
  const int start = std::clamp(mode, a, b);
  const double first = methods::binomial_pmf(start, n, p);
  constexpr double relative = 0x1p-60;
  double down = 0, up = 0;
  double term = first;
  for (int k = start; k > a; --k) {
    const double s = ratio.down(k);  // < 1 at or below the mode
    term *= s;
    down += term;
    if (s < 1.0 && term * s <= relative * first * (1.0 - s)) break;
  }
  term = first;
  for (int k = start; k < b; ++k) {
    const double r = ratio.up(k);  // < 1 at or above the mode
    term *= r;
    up += term;
    if (r < 1.0 && term * r <= relative * first * (1.0 - r)) break;
  }
  return first + (down + up);
}

}  // namespace covergrid::engine
