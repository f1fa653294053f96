#pragma once
/// Sampling models: the law of the success count X in a sample of n at true
/// proportion p. This is the one seam through which the engine reaches a
/// model: the exact sums and the Monte Carlo sampler read a model's
/// probability window, the continuous worst case and the uniform means its
/// point probabilities, run probabilities and (when it has one) closed-form
/// mass over a p-range. Adding a model is one file in engine/src/model/, one
/// line in engine/src/model/registry.cpp, and its tests (DEVELOPERS.md, "How
/// to add a sampling model").
#include "covergrid/engine/probability_window.hpp"
#include "covergrid/methods/interval.hpp"

#include <cstdint>
#include <functional>
#include <memory>
#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <vector>

namespace covergrid::engine {

/// Draws a clustered sample's cluster counts given its total x: what
/// design-effect methods read beyond x (methods::ClusterCounts). Drawn
/// conditionally on x, so each replicate's x, and every x-only method's
/// result, is the same whether the clusters are drawn or not, and the
/// methods stay paired on common draws.
class ClusterSampler {
 public:
  virtual ~ClusterSampler() = default;
  /// m, the number of clusters; sum_squares() reads m - 1 uniforms.
  virtual int clusters() const = 0;
  /// k, the units per cluster.
  virtual int cluster_size() const = 0;
  /// The sum of the squared cluster counts of a sample with x successes,
  /// from uniforms u[0 .. m - 2] in [0, 1).
  virtual std::int64_t sum_squares(int x, const double* u) const = 0;
};

class SamplingModel {
 public:
  virtual ~SamplingModel() = default;
  SamplingModel() = default;
  SamplingModel(const SamplingModel&) = delete;
  SamplingModel& operator=(const SamplingModel&) = delete;

  /// The model's kind in the registry ("binomial").
  virtual std::string_view kind() const = 0;
  /// The model's label with its parameters, e.g. "hypergeometric(N=5000)".
  virtual std::string label() const { return std::string(kind()); }
  /// What design-aware methods may know of the sample (methods::Design).
  virtual methods::Design design() const { return {}; }
  /// Why the model cannot draw a sample of n (a sample larger than the
  /// population, n not a multiple of the cluster size); empty when it can.
  virtual std::string refuses(int /*n*/) const { return {}; }
  /// The p the model evaluates for a requested p, the same at every n: p
  /// itself, unless the model can only attain some proportions (a finite
  /// population's K/N). The cube records the grid's attained p per model.
  virtual double attainable(double p) const { return p; }
  /// L when the true proportion can only be k/L, k = 0..L (a population of
  /// L); 0 when it ranges over [0, 1]. Over a p-range, the worst case, the
  /// uniform mean and the measure below a threshold are then taken over
  /// these points (a minimum, an average, a share of the range).
  virtual double lattice() const { return 0; }
  /// P(X = x) over the window of x that carries all but at most
  /// `out.tail_bound` of the mass (at most 1e-15), with running sums.
  virtual void window(int n, double p, ProbabilityWindow& out) const = 0;
  /// P(X = x), computed directly (not through a window).
  virtual double pmf(int x, int n, double p) const = 0;
  /// P(a <= X <= b); 0 when a > b.
  virtual double run_probability(int a, int b, int n, double p) const = 0;
  /// True when P(a <= X <= b) is unimodal in p for every run a..b: the
  /// continuous worst case may then take a covered run's minimum at the ends
  /// of the p-segment on which the run is fixed.
  virtual bool unimodal_runs() const = 0;
  /// The integral of P(X = x) over p in [a, b] in closed form, times
  /// mass_scale(n), when the model has one (uniform means); empty otherwise.
  /// The scale lets a model keep its masses in the units it computes them in
  /// without cancellation (binomial: Beta probabilities, scale n + 1).
  virtual std::optional<double> uniform_mass(int /*x*/, int /*n*/, double /*a*/, double /*b*/) const {
    return std::nullopt;
  }
  virtual double mass_scale(int /*n*/) const { return 1.0; }
  /// The sampler of cluster counts at (n, p) for a model whose design has
  /// clusters of more than one unit (design().cluster_size > 1); nullptr
  /// for the rest, whose samples are x alone.
  virtual std::unique_ptr<ClusterSampler> cluster_sampler(int /*n*/, double /*p*/) const { return nullptr; }
};

/// A registry entry: the kind, what it models, its parameters (validated by
/// the shared parameter machinery) and a factory taking resolved values.
struct ModelEntry {
  std::string kind;
  std::string description;
  std::vector<methods::ParamSpec> params;
  std::function<std::shared_ptr<const SamplingModel>(const methods::ParamValues&)> make;
};

/// Every model, in catalog order.
std::span<const ModelEntry> model_registry();
/// The entry of this kind, or nullptr.
const ModelEntry* find_model(std::string_view kind);
/// The model of this kind with these parameters, checked against the entry's
/// parameter list (methods::resolve_param_list; `resolved`, when given,
/// receives the values with defaults filled). Throws methods::ParameterError:
/// key "kind" for an unknown kind (the message lists the known ones), else
/// the offending parameter.
std::shared_ptr<const SamplingModel> make_model(std::string_view kind, const methods::ParamValues& given,
                                                methods::ParamValues* resolved = nullptr);
/// The first n of `ns` the model cannot draw, with the model's reason, as
/// "n = 40 is larger than the population N = 30"; empty when it draws them all.
std::string refused_n(const SamplingModel& model, std::span<const int> ns);
/// The binomial model (independent draws from an infinite population), shared.
const SamplingModel& binomial_model();
std::shared_ptr<const SamplingModel> binomial_model_ptr();

// Entry points of the model files (one per file; listed in model/registry.cpp).
ModelEntry binomial_entry();
ModelEntry hypergeometric_entry();

}  // namespace covergrid::engine
