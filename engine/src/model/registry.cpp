// The model registry: one line per model file.
#include "covergrid/engine/sampling_model.hpp"

#include "covergrid/methods/registry.hpp"

#include <fmt/format.h>

#include <vector>

namespace covergrid::engine {

// Entry points declared here, beside the one line each: a new model touches
// no header.
ModelEntry beta_binomial_entry();

std::span<const ModelEntry> model_registry() {
  static const std::vector<ModelEntry> entries = {
      binomial_entry(),
      hypergeometric_entry(),
      beta_binomial_entry(),
  };
  return entries;
}

const ModelEntry* find_model(std::string_view kind) {
  for (const auto& e : model_registry())
    if (e.kind == kind) return &e;
  return nullptr;
}

std::shared_ptr<const SamplingModel> make_model(std::string_view kind, const methods::ParamValues& given,
                                                methods::ParamValues* resolved) {
  const ModelEntry* entry = find_model(kind);
  if (!entry) {
    std::string known;
    for (const auto& e : model_registry())
      known += fmt::format("{}\"{}\"", known.empty() ? "" : ", ", e.kind);
    throw methods::ParameterError("kind",
                                  fmt::format("\"{}\" is not a known model (known: {})", kind, known));
  }
  const methods::ParamValues values =
      methods::resolve_param_list(fmt::format("model '{}'", entry->kind), entry->params, given);
  auto model = entry->make(values);
  if (resolved) *resolved = values;
  return model;
}

std::string refused_n(const SamplingModel& model, std::span<const int> ns) {
  for (int n : ns)
    if (std::string why = model.refuses(n); !why.empty()) return why;
  return {};
}

}  // namespace covergrid::engine
