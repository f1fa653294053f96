#pragma once
/// Numerical building blocks shared by the methods and the engine: one
/// project-wide Boost.Math policy, normal and beta quantiles, binomial
/// probabilities, and a bracketing root finder with an iteration limit.
///
/// Policy: Boost.Math promotes double to long double internally by default.
/// Turning that off (promote_double<false>) made ibeta 6-11x and ibeta_inv
/// 7-9x faster on this kind of machine with relative differences <= 5e-14;
/// the reference tests in tests/methods guard the accuracy that remains.
/// Errors raise exceptions (Boost's default), which we translate into
/// NumericalError where a limit cannot be computed.
#include "covergrid/methods/interval.hpp"

#include <boost/math/policies/policy.hpp>

#include <cmath>
#include <cstdint>

namespace covergrid::methods {

using math_policy = boost::math::policies::policy<boost::math::policies::promote_double<false>,
                                                  boost::math::policies::promote_float<false>>;

/// Standard normal quantile of the upper tail: z with P(Z > z) = tail.
double z_upper(double tail);
/// Quantile of Beta(a, b) at lower-tail probability q.
double beta_quantile(double a, double b, double q);
/// Quantile of Beta(a, b) at upper-tail probability q (x with P(B > x) = q),
/// computed directly rather than as beta_quantile(a, b, 1 - q).
double beta_quantile_upper(double a, double b, double q);
/// Regularized incomplete beta I_x(a, b) and its complement.
double beta_cdf(double a, double b, double x);
double beta_ccdf(double a, double b, double x);
/// log of the Beta(a, b) density at x up to its normalising constant
/// ((a-1) log x + (b-1) log(1-x)), for 0 < x < 1: differences of it are exact
/// log density ratios, free of the cancellation in lgamma at large a, b.
double beta_log_kernel(double a, double b, double x);

/// P(X = k) for X ~ Bin(n, p), accurate at large n (no lgamma cancellation).
double binomial_pmf(int k, int n, double p);
/// P(X <= k) and P(X > k) for X ~ Bin(n, p); each computed without 1 - cdf.
double binomial_cdf(int k, int n, double p);
double binomial_sf(int k, int n, double p);

/// The hypergeometric law: X successes in a sample of n drawn without
/// replacement from a population of N holding K successes (Boost.Math's
/// hypergeometric_distribution; N up to max_population). P(X = k),
/// P(X <= k) and P(X > k), each computed directly (no 1 - cdf); 0 or 1
/// outside the support max(0, n - (N - K)) .. min(n, K).
inline constexpr double max_population = 1e9;
double hypergeometric_pmf(int k, int n, std::int64_t K, std::int64_t N);
double hypergeometric_cdf(int k, int n, std::int64_t K, std::int64_t N);
double hypergeometric_sf(int k, int n, std::int64_t K, std::int64_t N);

/// Stopping rule of every root finder: the bracket is narrower than 1e-15
/// absolute or 4e-14 relative, well inside the contracted 1e-12 in p.
struct root_tolerance {
  bool operator()(double a, double b) const {
    const double w = std::fabs(b - a);
    return w <= 1e-15 || w <= 4e-14 * std::fmin(std::fabs(a), std::fabs(b));
  }
};

inline constexpr std::uintmax_t root_max_iterations = 200;

/// Root of f on [lo, hi], where f(lo) and f(hi) have opposite signs (TOMS 748).
/// If f does not change sign the nearer end is returned when `clamp` is set,
/// otherwise NumericalError is thrown. Throws NumericalError when the
/// iteration limit is reached.
template <class F>
double solve_bracketed(F f, double lo, double hi, const char* what, bool clamp = true);

}  // namespace covergrid::methods

#include "covergrid/methods/detail/solve.ipp"
