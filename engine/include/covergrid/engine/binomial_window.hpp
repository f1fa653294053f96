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
#include "covergrid/engine/probability_window.hpp"

#include <optional>

namespace covergrid::engine {

inline constexpr double tail_bound_per_side = 2.5e-16;

/// Fills `out` (and its running sums) for Bin(n, p); reuses the storage. The
/// binomial model's window (sampling_model.hpp).
void fill_binomial_window(int n, double p, ProbabilityWindow& out);

/// P(a <= X <= b) for X ~ Bin(n, p) as the sum of its terms, outward from
/// the one nearest the mode (Boost's ibeta_derivative) by the ratio
/// recurrence, each side stopped where a geometric bound puts the rest below
/// 2^-60 of the sum; nullopt where that would take more than 128 terms (the
/// caller then takes incomplete beta functions). Relative accuracy is a few
/// units in the last place times the number of terms; two incomplete betas
/// cost 3 to 4 times as much at n of a few hundred (`scripts/bench prototype`).
std::optional<double> binomial_run_sum(int a, int b, int n, double p);

/// A window that fills itself with Bin(n, p): for code and tests that work
/// with the binomial directly.
struct BinomialWindow : ProbabilityWindow {
  void fill(int n, double p) { fill_binomial_window(n, p, *this); }
};

}  // namespace covergrid::engine
