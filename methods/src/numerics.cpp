// The shared numerics: normal and beta quantiles, binomial probabilities.
#include "covergrid/methods/numerics.hpp"

#include "covergrid/methods/interval.hpp"

#include <boost/math/special_functions/beta.hpp>
#include <boost/math/special_functions/erf.hpp>

#include <algorithm>
#include <cmath>
#include <limits>
#include <numbers>

namespace covergrid::methods {

namespace bm = boost::math;

namespace {

/// A p so small that the binomial probabilities are known in closed form to
/// the last bit: Boost's ibeta_derivative overflows for p near the smallest
/// normal double (p = 1e-307 and p = 4.9e-324 aborted runs). Below 1e-200,
/// with n <= 10^7 (the largest n we accept), n p <= 1e-193, so (1 - p)^n =
/// 1 - n p + ... rounds to 1, P(X = 1) = n p (1 - p)^(n - 1) rounds to n p,
/// and P(X >= 2) <= (n p)^2 <= 1e-386 underflows to 0.
bool tiny(double p) { return p < 1e-200; }

}  // namespace

double z_upper(double tail) {
  // Phi^-1(1 - t) = sqrt(2) * erfc^-1(2 t): no cancellation for small t.
  return std::numbers::sqrt2 * bm::erfc_inv(2.0 * tail, math_policy{});
}

double beta_quantile(double a, double b, double q) {
  if (q <= 0) return 0.0;
  if (q >= 1) return 1.0;
  return bm::ibeta_inv(a, b, q, math_policy{});
}

double beta_quantile_upper(double a, double b, double q) {
  if (q <= 0) return 1.0;
  if (q >= 1) return 0.0;
  return bm::ibetac_inv(a, b, q, math_policy{});
}

double beta_cdf(double a, double b, double x) {
  if (x <= 0) return 0.0;
  if (x >= 1) return 1.0;
  return bm::ibeta(a, b, x, math_policy{});
}

double beta_ccdf(double a, double b, double x) {
  if (x <= 0) return 1.0;
  if (x >= 1) return 0.0;
  return bm::ibetac(a, b, x, math_policy{});
}

double beta_log_kernel(double a, double b, double x) {
  return (a - 1) * std::log(x) + (b - 1) * std::log1p(-x);
}

double binomial_pmf(int k, int n, double p) {
  if (k < 0 || k > n) return 0.0;
  if (p <= 0) return k == 0 ? 1.0 : 0.0;
  if (p >= 1) return k == n ? 1.0 : 0.0;
  if (tiny(p)) return k == 0 ? 1.0 : k == 1 ? static_cast<double>(n) * p : 0.0;
  // C(n,k) p^k q^(n-k) = ibeta_derivative(k+1, n-k+1, p) / (n+1); Boost
  // evaluates the prefix with Lanczos sums, accurate at large n.
  return bm::ibeta_derivative(static_cast<double>(k) + 1, static_cast<double>(n - k) + 1, p, math_policy{}) /
         (static_cast<double>(n) + 1);
}

double binomial_cdf(int k, int n, double p) {
  if (k < 0) return 0.0;
  if (k >= n) return 1.0;
  if (p <= 0) return 1.0;
  if (p >= 1) return 0.0;
  if (tiny(p)) return 1.0;  // 1 - n p rounds to 1 (k >= 0 here)
  // P(X <= k) = I_{1-p}(n-k, k+1) = 1 - I_p(k+1, n-k)
  return bm::ibetac(static_cast<double>(k) + 1, static_cast<double>(n - k), p, math_policy{});
}

double binomial_sf(int k, int n, double p) {
  if (k < 0) return 1.0;
  if (k >= n) return 0.0;
  if (p <= 0) return 0.0;
  if (p >= 1) return 1.0;
  if (tiny(p)) return k == 0 ? static_cast<double>(n) * p : 0.0;
  return bm::ibeta(static_cast<double>(k) + 1, static_cast<double>(n - k), p, math_policy{});
}

// The hypergeometric law is our own code, not Boost's hypergeometric
// distribution: Boost evaluates it by prime factorisation for populations up
// to about 10^5, which took 0.3 ms (N = 5000) to 3.7 ms (N = 10^5) per
// probability here, and an exact interval needs thousands of them per table.
// These take a few microseconds.
namespace {

struct HypergeometricSupport {
  std::int64_t lo, hi;
};

HypergeometricSupport support(int n, std::int64_t K, std::int64_t N) {
  return {std::max<std::int64_t>(0, n - (N - K)), std::min<std::int64_t>(n, K)};
}

/// h(k+1) / h(k) = (K - k)(n - k) / ((k + 1)(N - K - n + k + 1)).
double up_ratio(std::int64_t k, int n, std::int64_t K, std::int64_t N) {
  return static_cast<double>(K - k) * static_cast<double>(n - k) /
         (static_cast<double>(k + 1) * static_cast<double>(N - K - n + k + 1));
}

/// The sum of h over k, k + step, ... (step = +1 or -1) while inside
/// [lo, hi], from h(k) = start, with the terms falling all the way (k is
/// past the mode in the direction of travel). Stops when the geometric
/// bound on the rest (the ratio falls further out: log-concavity) is below
/// 2^-60 of the sum.
double falling_sum(std::int64_t k, int step, double start, int n, std::int64_t K, std::int64_t N,
                   const HypergeometricSupport& s) {
  double sum = 0, term = start;
  while (true) {
    sum += term;
    if (step > 0 ? k >= s.hi : k <= s.lo) return sum;
    const double r = step > 0 ? up_ratio(k, n, K, N) : 1.0 / up_ratio(k - 1, n, K, N);
    term *= r;
    k += step;
    if (r < 1.0 && term <= 0x1p-60 * sum * (1.0 - r)) return sum;
  }
}

/// The mode of the law, floor((n + 1)(K + 1) / (N + 2)), within the support.
std::int64_t mode_of(int n, std::int64_t K, std::int64_t N, const HypergeometricSupport& s) {
  const double m = std::floor((n + 1.0) * (static_cast<double>(K) + 1.0) / (static_cast<double>(N) + 2.0));
  return std::clamp(static_cast<std::int64_t>(m), s.lo, s.hi);
}

}  // namespace

double hypergeometric_pmf(int k, int n, std::int64_t K, std::int64_t N) {
  const auto s = support(n, K, N);
  if (k < s.lo || k > s.hi) return 0.0;
  if (n == N) return 1.0;  // a census: X = K
  // C(K, k) C(N-K, n-k) / C(N, n) = b(k; K, f) b(n-k; N-K, f) / b(n; N, f)
  // for any f in (0, 1): the powers of f and 1 - f cancel. With f = n/N the
  // three binomial probabilities are moderate where h is, and each is
  // accurate to a few ulps (binomial_pmf).
  const double f = static_cast<double>(n) / static_cast<double>(N);
  return binomial_pmf(k, static_cast<int>(K), f) * binomial_pmf(n - k, static_cast<int>(N - K), f) /
         binomial_pmf(n, static_cast<int>(N), f);
}

double hypergeometric_cdf(int k, int n, std::int64_t K, std::int64_t N) {
  const auto s = support(n, K, N);
  if (k < s.lo) return 0.0;
  if (k >= s.hi) return 1.0;
  // Below the mode the lower tail is a falling sum; above it, 1 - the upper
  // tail, which is at least h(mode) >= 1/(n + 1), so the subtraction loses at
  // most a factor n + 1 of relative precision.
  if (k < mode_of(n, K, N, s)) return falling_sum(k, -1, hypergeometric_pmf(k, n, K, N), n, K, N, s);
  return 1.0 - falling_sum(k + 1, +1, hypergeometric_pmf(k + 1, n, K, N), n, K, N, s);
}

double hypergeometric_sf(int k, int n, std::int64_t K, std::int64_t N) {
  const auto s = support(n, K, N);
  if (k < s.lo) return 1.0;
  if (k >= s.hi) return 0.0;
  if (k + 1 > mode_of(n, K, N, s))
    return falling_sum(k + 1, +1, hypergeometric_pmf(k + 1, n, K, N), n, K, N, s);
  return 1.0 - falling_sum(k, -1, hypergeometric_pmf(k, n, K, N), n, K, N, s);
}

}  // namespace covergrid::methods
