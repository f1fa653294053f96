// covergrid methods: the catalog.
#include "commands.hpp"

#include <fmt/format.h>

namespace covergrid::cli {

namespace {

int cmd_methods(std::ostream& out) {
  for (const auto& e : methods::registry()) {
    out << fmt::format("{}\n  {} — {}\n  {}\n  reference: {}\n", e.info.id, e.info.name,
                       methods::family_name(e.info.family), e.info.definition, e.info.reference);
    for (const auto& p : e.info.params) {
      std::string choices;
      for (const auto& c : p.choices) choices += (choices.empty() ? " (" : ", ") + c;
      if (!choices.empty()) choices += ")";
      out << fmt::format("  parameter {} = {}{}: {}\n", p.name, methods::param_text(p.default_value), choices,
                         p.description);
    }
    out << '\n';
  }
  out << "Sampling models (scenario [[model]] kind = ..., or --model kind:key=value,... for audit and "
         "plan);\n"
         "fpc-wald, fpc-wilson and exact-hypergeometric take N from the model they are evaluated under.\n\n";
  for (const auto& m : engine::model_registry()) {
    out << fmt::format("{}\n  {}\n", m.kind, m.description);
    for (const auto& p : m.params) out << fmt::format("  parameter {}: {}\n", p.name, p.description);
    out << '\n';
  }
  return exit_ok;
}

}  // namespace

Command add_methods_command(CLI::App& app) {
  auto* methods = app.add_subcommand(
      "methods", "The catalog of interval methods and sampling models: ids, parameters, references");
  return {methods, [](std::ostream& out, std::ostream&) { return cmd_methods(out); }};
}

}  // namespace covergrid::cli
