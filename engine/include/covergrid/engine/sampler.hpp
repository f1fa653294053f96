#pragma once
/// Binomial draws by inversion of the pmf window's CDF with a guide table
/// (Chen & Asau 1974): u in [0, 1) picks a guide cell in O(1), then a short
/// linear search. Our own rather than Boost.Random's binomial_distribution
/// because the window is already built for the exact sums and the draw then
/// costs a few ns with no state; Boost's is the reference in the tests
/// (chi-square goodness of fit for both). libstdc++ 12's
/// std::binomial_distribution is biased and is not used.
///
/// The window omits at most 5e-16 of the mass (binomial_window.hpp), so the
/// sampled law differs from Bin(n, p) by at most that much in total
/// variation: no test with fewer than ~1e30 draws could see it.
#include "covergrid/engine/probability_window.hpp"

#include <vector>

namespace covergrid::engine {

class WindowSampler {
 public:
  /// Builds the guide table for a filled window (kept by reference: the
  /// window must outlive the sampler's use and stay unchanged).
  void build(const ProbabilityWindow& window);
  /// The x for uniform u in [0, 1).
  int draw(double u) const {
    const double target = u * total_;
    std::size_t i = guide_[static_cast<std::size_t>(u * static_cast<double>(guide_.size()))];
    while (cum_[i + 1] <= target && i + 1 < last_) ++i;
    return lo_ + static_cast<int>(i);
  }

 private:
  const double* cum_ = nullptr;
  double total_ = 1;
  int lo_ = 0;
  std::size_t last_ = 1;  // window size
  std::vector<std::size_t> guide_;
};

}  // namespace covergrid::engine
