#include "covergrid/engine/sampler.hpp"

namespace covergrid::engine {

void WindowSampler::build(const ProbabilityWindow& window) {
  cum_ = window.cum.data();
  lo_ = window.lo;
  last_ = window.w.size();
  total_ = window.cum[last_];
  // guide_[g] = the first i with cum[i + 1] > g * total / G: the draw for any
  // u in [g/G, (g+1)/G) starts its search there.
  const std::size_t g_count = 4 * last_;  // 4 guide cells per x: the search is then almost always 0 or 1 step
  guide_.resize(g_count);
  std::size_t i = 0;
  for (std::size_t g = 0; g < g_count; ++g) {
    const double threshold = static_cast<double>(g) / static_cast<double>(g_count) * total_;
    while (i + 1 < last_ && cum_[i + 1] <= threshold) ++i;
    guide_[g] = i;
  }
}

}  // namespace covergrid::engine
