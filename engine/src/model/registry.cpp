// The model registry: one line per model file.
#include "covergrid/engine/sampling_model.hpp"

#include <vector>

namespace covergrid::engine {

std::span<const ModelEntry> model_registry() {
  static const std::vector<ModelEntry> entries = {
      binomial_entry(),
      hypergeometric_entry(),
  };
  return entries;
}

const ModelEntry* find_model(std::string_view kind) {
  for (const auto& e : model_registry())
    if (e.kind == kind) return &e;
  return nullptr;
}

}  // namespace covergrid::engine
