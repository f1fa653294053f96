#pragma once
/// The binomial pmf over the window of x that carries all but a provably
/// negligible mass.
///
/// The mode term is computed directly (Boost's ibeta_derivative, accurate at
/// large n, unlike an lgamma difference) and the ratio recurrence runs outwards
/// from it. Above the mode the ratios r_k = P(k+1)/P(k) = (n-k)p/((k+1)q) are
/// below 1 and decreasing, so the mass beyond k is at most
/// P(k) r_k / (1 - r_k) (a geometric series); below the mode the same holds for
/// s_k = P(k-1)/P(k). Each side stops as soon as that bound is below
/// tail_bound_per_side, so the neglected mass is below 2 * 2.5e-16 = 5e-16,
/// inside the 1e-15 the exact sums promise (README, "How the numbers are computed").
#include <vector>

namespace covergrid::engine {

inline constexpr double tail_bound_per_side = 2.5e-16;

struct BinomialWindow {
  int lo = 0;               // first x in the window
  int hi = -1;              // last x in the window
  std::vector<double> w;    // w[x - lo] = P(X = x)
  std::vector<double> cum;  // cum[i] = w[0] + ... + w[i-1]; size w.size() + 1

  /// Fills the window (and its running sums) for Bin(n, p); reuses the storage.
  void fill(int n, double p);
};

}  // namespace covergrid::engine
