#pragma once
/// The method registry: the single list of interval methods that the
/// scenario loader, the engine, the cube's method metadata, the command
/// line and the generic tests all read.
#include "covergrid/methods/interval.hpp"

#include <functional>
#include <memory>
#include <span>
#include <string>
#include <string_view>
#include <vector>

namespace covergrid::methods {

struct MethodInfo {
  std::string id;    // lower-case words joined by hyphens
  std::string name;  // display name
  Family family;
  std::vector<ParamSpec> params;
  std::string reference;   // published reference
  std::string definition;  // one-line definition, including one-sided forms
  /// Coverage at least nominal at every n and p, by construction (inversion
  /// of exact tail tests: Clopper-Pearson, Blaker); tests/engine holds every
  /// method so marked to it. Tables group methods by it.
  bool guaranteed = false;
};

/// A catalog entry: metadata plus a factory taking fully resolved parameters.
struct MethodEntry {
  MethodInfo info;
  std::function<std::unique_ptr<IntervalMethod>(const ParamValues&)> make;
};

/// True when the method can be made with every parameter at its default
/// (false for a method that needs a file: the table method). Catalog-wide
/// loops (the intervals command, registry-wide tests) take these only.
bool takes_defaults(const MethodEntry& entry);

/// Every method, in catalog order.
std::span<const MethodEntry> registry();
/// The entry with this id, or nullptr.
const MethodEntry* find_method(std::string_view id);

/// Checks `given` against the entry's parameter list and fills defaults.
/// Throws ParameterError naming the offending key.
ParamValues resolve_params(const MethodEntry& entry, const ParamValues& given);

/// The same check for any parameter list (methods and sampling models share
/// it): `owner` names what takes them in messages, e.g. "method 'wald'" or
/// "model 'hypergeometric'".
ParamValues resolve_param_list(std::string_view owner, std::span<const ParamSpec> specs,
                               const ParamValues& given);

/// "id" when all parameters are defaults, else "id(k=v,...)" for the
/// non-default ones, in the entry's parameter order (a path parameter shows
/// only its file name).
std::string default_label(const MethodEntry& entry, const ParamValues& resolved);

/// Text form of a parameter value ("true", "0.5", "clopper-pearson").
std::string param_text(const ParamValue& value);

/// A method bound to its parameters, with the label the user sees.
struct MethodInstance {
  const MethodEntry* entry = nullptr;
  ParamValues params;  // resolved
  std::string label;
  std::shared_ptr<const IntervalMethod> method;
};

/// Every n of `ns`, level and side the instance's method will be asked for
/// has limits: the first gap (methods::IntervalMethod::missing), or empty.
/// Only methods with a limited domain (tables) are asked.
std::string missing_limits(const MethodInstance& instance, std::span<const int> ns,
                           std::span<const double> levels, std::span<const Side> sides);

/// Builds an instance; an empty label means default_label().
MethodInstance make_instance(std::string_view id, const ParamValues& given, std::string label = {});

// Entry points of the method files (one per file; listed in registry.cpp).
MethodEntry wald_entry();
MethodEntry wald_cc_entry();
MethodEntry wald_half_entry();
MethodEntry wilson_entry();
MethodEntry wilson_cc_entry();
MethodEntry agresti_coull_entry();
MethodEntry clopper_pearson_entry();
MethodEntry mid_p_entry();
MethodEntry jeffreys_entry();
MethodEntry bayes_hpd_entry();
MethodEntry likelihood_ratio_entry();
MethodEntry arcsine_entry();
MethodEntry logit_entry();
MethodEntry blaker_entry();
MethodEntry fpc_wald_entry();
MethodEntry fpc_wilson_entry();
MethodEntry exact_hypergeometric_entry();
MethodEntry deff_wilson_entry();
MethodEntry deff_clopper_pearson_entry();
MethodEntry deff_jeffreys_entry();
MethodEntry table_entry();

}  // namespace covergrid::methods
