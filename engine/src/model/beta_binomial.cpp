// beta-binomial — a clustered sample: m clusters of k units (n = m k); each
// cluster's success probability is drawn from a Beta law with mean p and
// intra-cluster correlation rho (Beta(a, b), a = p (1 - rho)/rho,
// b = (1 - p)(1 - rho)/rho), and its count is binomial given it. A cluster's
// count is then beta-binomial, and X, the sample's count, the sum of m
// independent cluster counts. rho = 0 is the binomial model (each cluster
// Bin(k, p), their sum Bin(n, p)); the variance of X is n p (1 - p) times the
// design effect 1 + (k - 1) rho.
//
// Window: the cluster law from its ratio recurrence
//   f(y+1)/f(y) = (k - y)/(y + 1) * (p (1 - rho) + y rho) / ((1 - p)(1 - rho) + (k - y - 1) rho)
// (the Beta parameters multiplied through by rho, so rho = 0 needs no special
// case), summed in logarithms, scaled by its largest term and normalised;
// then X's law by m - 1 convolutions with it, all in positive terms (no
// cancellation). After each convolution the negligible ends are trimmed:
// at most 5e-17/m of mass per end per step, so the mass outside the final
// window, stated as its tail bound, is at most 1e-16 (the dropped mass is
// summed, not estimated). Cost per window: about n (k + 1) multiplications
// per convolution over the trimmed length; the whole grid's cost grows as
// n^2 in the worst case.
//
// Not known: whether a covered run's probability is unimodal in p, and a
// closed-form mass over p. The continuous worst case therefore searches each
// segment densely (flagged as refined), and the means over p are taken by
// Gauss-Legendre quadrature per segment between interval endpoints
// (quadrature_means in engine/src/exact_points.cpp).
//
// Methods that use only (x, n) are evaluated exactly and by Monte Carlo (the
// sampler inverts this window). Design-effect methods, which need the
// cluster counts, are evaluated by Monte Carlo only: each replicate's x is
// drawn from this window as for every method, and its cluster counts then
// conditionally on x (BetaBinomialClusters below).
#include "covergrid/engine/sampling_model.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <vector>

namespace covergrid::engine {
namespace {

/// The law of a sum of cluster counts: w[i] = P(sum = lo + i).
struct Partial {
  int lo = 0;
  std::vector<double> w;
};

/// Drops the ends of `g` while each end's dropped mass stays within
/// `per_end`, shifting `lo` by what goes from the front.
void trim(std::vector<double>& g, int& lo, double per_end, double& dropped) {
  double front = 0;
  std::size_t first = 0;
  while (first + 1 < g.size() && front + g[first] <= per_end) front += g[first++];
  double back = 0;
  std::size_t last = g.size();
  while (last > first + 1 && back + g[last - 1] <= per_end) back += g[--last];
  if (first > 0 || last < g.size()) {
    g = std::vector<double>(g.begin() + static_cast<std::ptrdiff_t>(first),
                            g.begin() + static_cast<std::ptrdiff_t>(last));
    lo += static_cast<int>(first);
    dropped += front + back;
  }
}

/// The laws of the sums of the first 1, 2, .., m cluster counts, each the
/// previous one convolved with the cluster law and trimmed (all of them when
/// `keep_all`, else only X's, the last); returns the mass dropped in all.
/// The window and the cluster sampler both call it with the model's m, so
/// they trim alike.
double convolve(const std::vector<double>& cluster, int m, std::vector<Partial>& sums, bool keep_all) {
  const double per_end = 5e-17 / m;
  double dropped = 0;
  sums.assign(1, Partial{0, cluster});
  trim(sums.back().w, sums.back().lo, per_end, dropped);
  std::vector<double> next;
  for (int j = 1; j < m; ++j) {
    const Partial& g = sums.back();
    next.assign(g.w.size() + cluster.size() - 1, 0.0);
    for (std::size_t a = 0; a < g.w.size(); ++a) {
      const double ga = g.w[a];
      if (ga == 0.0) continue;
      for (std::size_t b = 0; b < cluster.size(); ++b) next[a + b] += ga * cluster[b];
    }
    Partial sum{g.lo, next};
    trim(sum.w, sum.lo, per_end, dropped);
    if (keep_all)
      sums.push_back(std::move(sum));
    else
      sums.back() = std::move(sum);
  }
  return dropped;
}

class BetaBinomial final : public SamplingModel {
 public:
  BetaBinomial(int k, double rho) : k_(k), rho_(rho) {}
  std::string_view kind() const override { return "beta-binomial"; }
  std::string label() const override { return fmt::format("beta-binomial(k={},icc={})", k_, rho_); }
  methods::Design design() const override { return {0, k_}; }
  std::string refuses(int n) const override {
    if (n % k_ == 0) return {};
    return fmt::format("n = {} is not a multiple of the cluster size k = {}", n, k_);
  }
  bool unimodal_runs() const override { return false; }

  double pmf(int x, int n, double p) const override {
    const ProbabilityWindow& w = cached(n, p);
    if (x < w.lo || x > w.hi) return 0.0;
    return w.w[static_cast<std::size_t>(x - w.lo)];
  }
  double run_probability(int a, int b, int n, double p) const override {
    const ProbabilityWindow& w = cached(n, p);
    const int lo = std::max(a, w.lo), hi = std::min(b, w.hi);
    if (lo > hi) return 0.0;
    return w.cum[static_cast<std::size_t>(hi - w.lo + 1)] - w.cum[static_cast<std::size_t>(lo - w.lo)];
  }

  void window(int n, double p, ProbabilityWindow& out) const override {
    out.w.clear();
    if (p <= 0.0 || p >= 1.0 || n % k_ != 0) {
      // Degenerate (or, for an n the model refuses, no law at all: an empty
      // window, which the loader never lets the engine ask for).
      if (n % k_ != 0) {
        out.lo = 0;
        out.hi = -1;
        out.tail_bound = 1;
      } else {
        out.lo = out.hi = p <= 0.0 ? 0 : n;
        out.w.push_back(1.0);
        out.tail_bound = 0;
      }
      out.sum_up();
      return;
    }
    std::vector<Partial> sums;
    out.tail_bound = convolve(cluster_law(p), n / k_, sums, false);
    out.lo = sums.back().lo;
    out.hi = out.lo + static_cast<int>(sums.back().w.size()) - 1;
    out.w = std::move(sums.back().w);
    out.sum_up();
  }

  std::unique_ptr<ClusterSampler> cluster_sampler(int n, double p) const override;

 private:
  /// P(Y = y), y = 0..k, for one cluster at mean p (0 < p < 1).
  std::vector<double> cluster_law(double p) const {
    std::vector<double> logf(static_cast<std::size_t>(k_) + 1, 0.0);
    for (int y = 0; y < k_; ++y) {
      const double num = (k_ - y) * (p * (1 - rho_) + y * rho_);
      const double den = (y + 1.0) * ((1 - p) * (1 - rho_) + (k_ - y - 1.0) * rho_);
      logf[static_cast<std::size_t>(y) + 1] =
          logf[static_cast<std::size_t>(y)] + std::log(num) - std::log(den);
    }
    const double top = *std::max_element(logf.begin(), logf.end());
    std::vector<double> f(logf.size());
    double sum = 0;
    for (std::size_t i = 0; i < f.size(); ++i) sum += (f[i] = std::exp(logf[i] - top));
    for (double& v : f) v /= sum;
    return f;
  }

  /// The last window computed on this thread (the worst case and the
  /// enumeration ask for many x at one (n, p)).
  const ProbabilityWindow& cached(int n, double p) const {
    // Keyed by the law itself, not the object's address (which a later
    // model may reuse).
    thread_local int cached_k = -1, cached_n = -1;
    thread_local double cached_rho = -1, cached_p = std::numeric_limits<double>::quiet_NaN();
    thread_local ProbabilityWindow w;
    if (cached_k != k_ || !(cached_rho == rho_) || cached_n != n || !(cached_p == p)) {
      window(n, p, w);
      cached_k = k_;
      cached_rho = rho_;
      cached_n = n;
      cached_p = p;
    }
    return w;
  }

  int k_;
  double rho_;
};

/// Cluster counts given X = x, drawn backwards: the last cluster's count y
/// has P(y | the m clusters sum to x) proportional to f(y) g_{m-1}(x - y),
/// with f the cluster law and g_{m-1} the law of the first m - 1 clusters'
/// sum; then the same for m - 1 clusters summing to x - y, down to the
/// first, which takes what remains. The laws are the window's own trimmed
/// convolutions, so every x the window can draw has a positive weight at
/// every step (each entry of g_r is a sum of exactly these products). Cost:
/// about n multiplications per replicate.
class BetaBinomialClusters final : public ClusterSampler {
 public:
  BetaBinomialClusters(int m, int k, double p, std::vector<double> f, std::vector<Partial> sums)
      : m_(m), k_(k), p_(p), f_(std::move(f)), sums_(std::move(sums)) {}
  int clusters() const override { return m_; }
  int cluster_size() const override { return k_; }
  std::int64_t sum_squares(int x, const double* u) const override {
    if (p_ <= 0.0 || p_ >= 1.0) return static_cast<std::int64_t>(x) * k_;  // every cluster 0 or every one k
    std::int64_t s = 0;
    int rest = x;
    for (int r = m_ - 1; r >= 1; --r) {
      const Partial& g = sums_[static_cast<std::size_t>(r) - 1];
      const int g_hi = g.lo + static_cast<int>(g.w.size()) - 1;
      const int y_lo = std::max(0, rest - g_hi), y_hi = std::min(k_, rest - g.lo);
      double total = 0;
      for (int y = y_lo; y <= y_hi; ++y) total += weight(g, y, rest);
      const double target = u[m_ - 1 - r] * total;
      int pick = y_hi;  // reached only by rounding in the last step's sum
      double run = 0;
      for (int y = y_lo; y <= y_hi; ++y) {
        const double w = weight(g, y, rest);
        run += w;
        if (w > 0 && target < run) {
          pick = y;
          break;
        }
      }
      s += static_cast<std::int64_t>(pick) * pick;
      rest -= pick;
    }
    return s + static_cast<std::int64_t>(rest) * rest;
  }

 private:
  double weight(const Partial& g, int y, int rest) const {
    return f_[static_cast<std::size_t>(y)] * g.w[static_cast<std::size_t>(rest - y - g.lo)];
  }
  int m_, k_;
  double p_;
  std::vector<double> f_;
  std::vector<Partial> sums_;
};

std::unique_ptr<ClusterSampler> BetaBinomial::cluster_sampler(int n, double p) const {
  const int m = n / k_;
  if (k_ <= 1 || n % k_ != 0) return nullptr;
  if (p <= 0.0 || p >= 1.0)
    return std::make_unique<BetaBinomialClusters>(m, k_, p, std::vector<double>{}, std::vector<Partial>{});
  std::vector<double> f = cluster_law(p);
  std::vector<Partial> sums;
  convolve(f, m, sums, true);  // g_1 .. g_m, trimmed as the window trims; g_m unused
  return std::make_unique<BetaBinomialClusters>(m, k_, p, std::move(f), std::move(sums));
}

}  // namespace

ModelEntry beta_binomial_entry() {
  return {
      "beta-binomial",
      "a clustered sample: m clusters of k units (n = m k), each cluster's success probability drawn "
      "from a Beta law with mean p and intra-cluster correlation icc",
      {{"cluster_size",
        methods::ParamSpec::Kind::number,
        0.0,
        "k, the units per cluster: a whole number; every n of the grid a multiple of it",
        {},
        1.0,
        1e7,
        true},
       {"icc",
        methods::ParamSpec::Kind::number,
        0.0,
        "rho, the intra-cluster correlation, in [0, 1)",
        {},
        0.0,
        0.0,
        true}},
      [](const methods::ParamValues& v) -> std::shared_ptr<const SamplingModel> {
        const auto k_it = v.find("cluster_size");
        const double k = k_it == v.end() ? 0.0 : std::get<double>(k_it->second);
        if (k == 0)
          throw methods::ParameterError("cluster_size",
                                        "model 'beta-binomial' needs 'cluster_size', the units per cluster");
        if (k != std::floor(k))
          throw methods::ParameterError(
              "cluster_size",
              fmt::format("parameter 'cluster_size' of model 'beta-binomial' must be a whole number (got {})",
                          k));
        const auto r_it = v.find("icc");
        const double rho = r_it == v.end() ? 0.0 : std::get<double>(r_it->second);
        if (!(rho >= 0 && rho < 1))
          throw methods::ParameterError(
              "icc", fmt::format("parameter 'icc' of model 'beta-binomial' = {} is outside [0, 1)", rho));
        return std::make_shared<BetaBinomial>(static_cast<int>(k), rho);
      }};
}

}  // namespace covergrid::engine
