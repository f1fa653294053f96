#pragma once
/// The law of the success count X at one (n, p), as the engine uses it: the
/// probabilities over the window of x that carries all but a proven
/// negligible mass, with running sums. Model-free: every sampling model fills
/// one (sampling_model.hpp), and the exact sums, the Monte Carlo sampler and
/// the width moments read only this.
#include <vector>

namespace covergrid::engine {

struct ProbabilityWindow {
  int lo = 0;               // first x in the window
  int hi = -1;              // last x in the window
  std::vector<double> w;    // w[x - lo] = P(X = x)
  std::vector<double> cum;  // cum[i] = w[0] + ... + w[i-1]; size w.size() + 1
  double tail_bound = 0;    // the mass outside [lo, hi] is at most this (proven by the model)

  /// Fills cum from w.
  void sum_up() {
    cum.resize(w.size() + 1);
    double s = 0;
    cum[0] = 0;
    for (std::size_t i = 0; i < w.size(); ++i) cum[i + 1] = (s += w[i]);
  }
};

}  // namespace covergrid::engine
