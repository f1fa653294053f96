// The scenario's [[model]] tables: each kind looked up in the engine's model
// registry, its parameters checked by the registry's ParamSpec list (the
// machinery method parameters use), every n of the grid checked against the
// model, labels unique. Without [[model]], one binomial model.
#include "toml_fields.hpp"

#include "covergrid/engine/random.hpp"

#include <fmt/format.h>
#include <toml++/toml.h>

#include <set>
#include <string>
#include <vector>

namespace covergrid::scenarios::detail {

std::vector<engine::ModelSpec> read_models(const Context& ctx, const toml::table& root,
                                           const std::vector<int>& ns) {
  std::vector<engine::ModelSpec> models_out;
  if (const toml::node* models = root.get("model")) {
    if (!models->is_array_of_tables()) ctx.fail(models, "model must be an array of tables, [[model]]");
    std::set<std::string> model_labels;
    for (const auto& item : *models->as_array()) {
      const auto& t = *item.as_table();
      const toml::node* kind = t.get("kind");
      if (!kind) ctx.fail(&item, "[[model]] needs 'kind'");
      const std::string k = string_of(ctx, *kind, "[[model]] kind");
      // Kinds and their parameters come from the engine's model registry
      // (one line per model), checked by the same code as method parameters.
      const engine::ModelEntry* entry = engine::find_model(k);
      if (!entry) {
        try {
          engine::make_model(k, {});  // throws, listing the known kinds
        } catch (const methods::ParameterError& e) {
          ctx.fail(kind, fmt::format("[[model]] kind = {}", e.what()));
        }
      }
      std::vector<std::string> keys = {"kind", "label"};
      for (const auto& spec : entry->params) keys.push_back(spec.name);
      reject_unknown(ctx, t, fmt::format("[[model]] kind = \"{}\": ", k), keys);
      methods::ParamValues given;
      const toml::node* first_param = nullptr;
      for (const auto& [key, node] : t) {
        if (key.str() == "kind" || key.str() == "label") continue;
        if (!first_param) first_param = &node;
        given[std::string(key.str())] = param_of(ctx, node, fmt::format("[[model]] {}.{}", k, key.str()));
      }
      engine::ModelSpec spec;
      try {
        spec.model = engine::make_model(k, given, &spec.params);
      } catch (const methods::ParameterError& e) {
        const toml::node* at = t.get(e.key());
        ctx.fail(at ? at : &item, fmt::format("[[model]] {}", e.what()));
      }
      for (int n : ns)
        if (const std::string why = spec.model->refuses(n); !why.empty())
          ctx.fail(first_param ? first_param : &item,
                   fmt::format("[[model]] {} cannot draw every n of the grid: {}", spec.model->label(), why));
      spec.label = spec.model->label();
      if (const auto* l = t.get("label")) {
        spec.label = string_of(ctx, *l, "[[model]] label");
        check_label(ctx, *l, spec.label, "[[model]] label");
      }
      if (!model_labels.insert(spec.label).second)
        ctx.fail(&item, fmt::format("[[model]] label \"{}\" is used twice", spec.label));
      models_out.push_back(spec);
      if (models_out.size() > engine::max_stream_models)
        ctx.fail(&item,
                 fmt::format("[[model]] more than {} models in one scenario", engine::max_stream_models));
    }
  } else {
    models_out.push_back({});
  }
  return models_out;
}

}  // namespace covergrid::scenarios::detail
