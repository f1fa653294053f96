// hypergeometric — a sample of n drawn without replacement from a finite
// population of N units, K of them successes: X ~ Hypergeometric(N, K, n).
// The true proportion can only be K/N, so a requested p is snapped to
// K = round(pN) (attainable(); the cube records the snapped grid), and over a
// p-range the worst case and the means are taken over the points K/N
// (lattice() = N).
//
// Window: the ratio recurrence h(k+1)/h(k) = (K-k)(n-k) / ((k+1)(N-K-n+k+1))
// outward from the mode floor((n+1)(K+1)/(N+2)), started at 1 and normalised
// by the window's sum. The law is log-concave (the ratio falls in k), so past
// the mode each side's remaining mass is at most term * r / (1 - r) -- the
// same geometric bound as the binomial window, and conservative here because
// the unnormalised sum is at least the mode's 1. Normalising by the window's
// sum instead of 1 changes each probability by a factor within the tail
// bound (below 1e-15).
//
// Runs are unimodal in K (the discrete counterpart of the binomial proof):
// couple the populations with K and K + 1 successes by turning one failure
// into a success; X rises by one exactly when that unit is drawn, with
// probability n/N, and the other n - 1 draws then follow
// Hypergeometric(N - 1, K, n - 1) =: h'. So
//   P_{K+1}(X <= b) - P_K(X <= b) = -(n/N) h'(b), and
//   P_{K+1}(a <= X <= b) - P_K(a <= X <= b) = (n/N) [h'(a - 1) - h'(b)].
// h'(a-1)/h'(b) falls in K (monotone likelihood ratio of the hypergeometric
// in K), so the difference changes sign at most once, from + to -: the run's
// probability rises, then falls. Between two interval endpoints the minimum
// over the points K/N is at the first or last point of the segment.
//
// Point probabilities and run probabilities come from Boost.Math's
// hypergeometric distribution (methods/numerics).
#include "covergrid/engine/sampling_model.hpp"
#include "covergrid/methods/numerics.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>
#include <cstdint>

namespace covergrid::engine {
namespace {

constexpr double tail_bound_per_side = 5e-16;

class Hypergeometric final : public SamplingModel {
 public:
  explicit Hypergeometric(std::int64_t population) : big_n_(population) {}
  std::string_view kind() const override { return "hypergeometric"; }
  std::string label() const override { return fmt::format("hypergeometric(N={})", big_n_); }
  methods::Design design() const override { return {static_cast<double>(big_n_), 1}; }
  std::string refuses(int n) const override {
    if (n <= big_n_) return {};
    return fmt::format("n = {} is larger than the population N = {}", n, big_n_);
  }
  double attainable(double p) const override {
    return static_cast<double>(count(p)) / static_cast<double>(big_n_);
  }
  double lattice() const override { return static_cast<double>(big_n_); }
  bool unimodal_runs() const override { return true; }

  double pmf(int x, int n, double p) const override {
    return methods::hypergeometric_pmf(x, n, count(p), big_n_);
  }
  double run_probability(int a, int b, int n, double p) const override {
    if (a > b) return 0.0;
    const std::int64_t k = count(p);
    const double r =
        1.0 - methods::hypergeometric_cdf(a - 1, n, k, big_n_) - methods::hypergeometric_sf(b, n, k, big_n_);
    return std::clamp(r, 0.0, 1.0);
  }

  void window(int n, double p, ProbabilityWindow& out) const override {
    const std::int64_t big_k = count(p);
    const std::int64_t fail = big_n_ - big_k;
    const int lo_s = static_cast<int>(std::max<std::int64_t>(0, n - fail));
    const int hi_s = static_cast<int>(std::min<std::int64_t>(n, big_k));
    auto& w = out.w;
    w.clear();
    out.tail_bound = 2 * tail_bound_per_side;
    const double kk = static_cast<double>(big_k), ff = static_cast<double>(fail);
    const int mode =
        std::clamp(static_cast<int>(std::floor((n + 1.0) * (kk + 1.0) / (static_cast<double>(big_n_) + 2.0))),
                   lo_s, hi_s);
    thread_local std::vector<double> down;
    down.clear();
    double term = 1.0;
    int k = mode;
    while (k > lo_s) {
      // h(k-1)/h(k) = k (N-K-n+k) / ((K-k+1)(n-k+1))
      const double s = k * (ff - n + k) / ((kk - k + 1) * (n - k + 1.0));
      if (s < 1.0 && term * s <= tail_bound_per_side * (1.0 - s)) break;
      term *= s;
      --k;
      down.push_back(term);
    }
    out.lo = k;
    w.assign(down.rbegin(), down.rend());
    w.push_back(1.0);
    term = 1.0;
    k = mode;
    while (k < hi_s) {
      const double r = (kk - k) * (n - k) / ((k + 1.0) * (ff - n + k + 1));
      if (r < 1.0 && term * r <= tail_bound_per_side * (1.0 - r)) break;
      term *= r;
      ++k;
      w.push_back(term);
    }
    out.hi = k;
    double sum = 0;
    for (double v : w) sum += v;
    for (double& v : w) v /= sum;
    out.sum_up();
  }

 private:
  /// K = round(pN), within 0..N.
  std::int64_t count(double p) const {
    const double k = std::nearbyint(std::clamp(p, 0.0, 1.0) * static_cast<double>(big_n_));
    return std::clamp<std::int64_t>(static_cast<std::int64_t>(k), 0, big_n_);
  }
  std::int64_t big_n_;
};

}  // namespace

ModelEntry hypergeometric_entry() {
  return {"hypergeometric",
          "draws without replacement from a finite population of N units, K = round(pN) of them "
          "successes; p is snapped to K/N",
          {{"population",
            methods::ParamSpec::Kind::number,
            0.0,
            "N, the population size: a whole number at least every n of the grid",
            {},
            1.0,
            methods::max_population,
            true}},
          [](const methods::ParamValues& v) -> std::shared_ptr<const SamplingModel> {
            const auto it = v.find("population");
            const double population = it == v.end() ? 0.0 : std::get<double>(it->second);
            if (population == 0)
              throw methods::ParameterError(
                  "population", "model 'hypergeometric' needs 'population', the population size N");
            if (population < 1 || population != std::floor(population))
              throw methods::ParameterError(
                  "population",
                  fmt::format("parameter 'population' of model 'hypergeometric' must be a whole number "
                              "of at least 1 (got {})",
                              population));
            return std::make_shared<Hypergeometric>(static_cast<std::int64_t>(population));
          }};
}

}  // namespace covergrid::engine
