#include "covergrid/engine/binomial_window.hpp"

#include "covergrid/methods/numerics.hpp"

#include <algorithm>
#include <cmath>

namespace covergrid::engine {

void BinomialWindow::fill(int n, double p) {
  w.clear();
  if (p <= 0.0 || p >= 1.0) {
    lo = hi = (p <= 0.0 ? 0 : n);
    w.push_back(1.0);
    return;
  }
  const double q = 1.0 - p;
  const double odds = p / q;
  const int mode = std::clamp(static_cast<int>(std::floor((n + 1.0) * p)), 0, n);
  const double at_mode = methods::binomial_pmf(mode, n, p);

  // Upper side: terms mode+1, mode+2, ... until the geometric tail bound holds.
  std::vector<double>& up = w;  // collected in order mode..hi
  up.push_back(at_mode);
  double term = at_mode;
  int k = mode;
  while (k < n) {
    const double r = (n - k) * odds / (k + 1.0);
    if (r < 1.0 && term * r / (1.0 - r) <= tail_bound_per_side) break;
    term *= r;
    ++k;
    up.push_back(term);
  }
  hi = k;

  // Lower side, collected separately then spliced in front.
  thread_local std::vector<double> down;
  down.clear();
  term = at_mode;
  k = mode;
  while (k > 0) {
    const double s = k / ((n - k + 1.0) * odds);
    if (s < 1.0 && term * s / (1.0 - s) <= tail_bound_per_side) break;
    term *= s;
    --k;
    down.push_back(term);
  }
  lo = k;
  w.insert(w.begin(), down.rbegin(), down.rend());
}

}  // namespace covergrid::engine
