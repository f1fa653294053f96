// The registry: one line per method. Adding a method = one source file in
// methods/src, one line here, one test file in tests/methods.
#include "covergrid/methods/registry.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <filesystem>
#include <cmath>

namespace covergrid::methods {

std::span<const MethodEntry> registry() {
  static const std::vector<MethodEntry> entries = {
      wald_entry(),
      wald_cc_entry(),
      wald_half_entry(),
      wilson_entry(),
      wilson_cc_entry(),
      agresti_coull_entry(),
      clopper_pearson_entry(),
      mid_p_entry(),
      jeffreys_entry(),
      bayes_hpd_entry(),
      likelihood_ratio_entry(),
      arcsine_entry(),
      logit_entry(),
      blaker_entry(),
      fpc_wald_entry(),
      fpc_wilson_entry(),
      exact_hypergeometric_entry(),
      deff_wilson_entry(),
      deff_clopper_pearson_entry(),
      deff_jeffreys_entry(),
      table_entry(),
  };
  return entries;
}

bool takes_defaults(const MethodEntry& entry) {
  return std::none_of(entry.info.params.begin(), entry.info.params.end(),
                      [](const ParamSpec& p) { return p.kind == ParamSpec::Kind::path; });
}

const MethodEntry* find_method(std::string_view id) {
  for (const auto& e : registry())
    if (e.info.id == id) return &e;
  return nullptr;
}

std::string param_text(const ParamValue& value) {
  if (const bool* b = std::get_if<bool>(&value)) return *b ? "true" : "false";
  if (const double* d = std::get_if<double>(&value)) return fmt::format("{}", *d);
  return std::get<std::string>(value);
}

ParamValues resolve_params(const MethodEntry& entry, const ParamValues& given) {
  return resolve_param_list(fmt::format("method '{}'", entry.info.id), entry.info.params, given);
}

ParamValues resolve_param_list(std::string_view owner, std::span<const ParamSpec> specs,
                               const ParamValues& given) {
  ParamValues out;
  for (const auto& [key, value] : given) {
    // Captured by name: clang 14 (the fuzz build) cannot capture a structured binding.
    const std::string& name = key;
    const auto spec =
        std::find_if(specs.begin(), specs.end(), [&](const ParamSpec& s) { return s.name == name; });
    if (spec == specs.end()) {
      std::string known;
      for (const auto& s : specs) known += (known.empty() ? "" : ", ") + s.name;
      throw ParameterError(
          key, fmt::format("{} takes no parameter '{}'{}", owner, key,
                           known.empty() ? std::string(" (it takes none)") : " (it takes: " + known + ")"));
    }
    switch (spec->kind) {
      case ParamSpec::Kind::boolean:
        if (!std::holds_alternative<bool>(value))
          throw ParameterError(key, fmt::format("parameter '{}' of {} must be true or false", key, owner));
        break;
      case ParamSpec::Kind::number: {
        const double* d = std::get_if<double>(&value);
        if (!d) throw ParameterError(key, fmt::format("parameter '{}' of {} must be a number", key, owner));
        if (!std::isfinite(*d) || (spec->min_closed ? *d < spec->min : *d <= spec->min) ||
            (spec->max > 0 && *d > spec->max))
          throw ParameterError(
              key, spec->max > 0 ? fmt::format("parameter '{}' of {} = {} is outside {}{:g}, {:g}]", key,
                                               owner, *d, spec->min_closed ? "[" : "(", spec->min, spec->max)
                                 : fmt::format("parameter '{}' of {} = {} must be greater than {}", key,
                                               owner, *d, spec->min));
        break;
      }
      case ParamSpec::Kind::path:
        if (!std::holds_alternative<std::string>(value) || std::get<std::string>(value).empty())
          throw ParameterError(key, fmt::format("parameter '{}' of {} must be a file name", key, owner));
        break;
      case ParamSpec::Kind::choice: {
        const std::string* s = std::get_if<std::string>(&value);
        if (!s || std::find(spec->choices.begin(), spec->choices.end(), *s) == spec->choices.end()) {
          std::string list;
          for (const auto& c : spec->choices) list += (list.empty() ? "\"" : ", \"") + c + "\"";
          throw ParameterError(key, fmt::format("parameter '{}' of {} must be one of {}", key, owner, list));
        }
        break;
      }
    }
    out[key] = value;
  }
  for (const auto& spec : specs)
    if (!out.contains(spec.name)) out[spec.name] = spec.default_value;
  return out;
}

std::string default_label(const MethodEntry& entry, const ParamValues& resolved) {
  std::string extra;
  for (const auto& spec : entry.info.params) {
    const auto it = resolved.find(spec.name);
    if (it == resolved.end() || it->second == spec.default_value) continue;
    std::string text = param_text(it->second);
    if (spec.kind == ParamSpec::Kind::path) text = std::filesystem::path(text).filename().string();
    extra += (extra.empty() ? "" : ",") + spec.name + "=" + text;
  }
  return extra.empty() ? entry.info.id : entry.info.id + "(" + extra + ")";
}

std::string missing_limits(const MethodInstance& instance, std::span<const int> ns,
                           std::span<const double> levels, std::span<const Side> sides) {
  if (!instance.method->limited_domain()) return {};
  for (const Side side : sides) {
    if (!instance.method->supports(side)) continue;
    for (const double level : levels)
      for (const int n : ns)
        if (std::string why = instance.method->missing(n, level, side); !why.empty()) return why;
  }
  return {};
}

MethodInstance make_instance(std::string_view id, const ParamValues& given, std::string label) {
  const MethodEntry* entry = find_method(id);
  if (!entry) throw ParameterError("id", fmt::format("unknown method id '{}'", id));
  MethodInstance inst;
  inst.entry = entry;
  inst.params = resolve_params(*entry, given);
  inst.label = label.empty() ? default_label(*entry, inst.params) : std::move(label);
  inst.method = entry->make(inst.params);
  return inst;
}

}  // namespace covergrid::methods
