// The shared numerics: normal and beta quantiles, binomial probabilities.
#include "covergrid/methods/numerics.hpp"

#include "covergrid/methods/interval.hpp"

#include <boost/math/special_functions/beta.hpp>
#include <boost/math/special_functions/erf.hpp>

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

}  // namespace covergrid::methods
