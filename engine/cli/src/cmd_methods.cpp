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
  return exit_ok;
}

}  // namespace

Command add_methods_command(CLI::App& app) {
  auto* methods =
      app.add_subcommand("methods", "The catalog of interval methods: ids, parameters, references");
  return {methods, [](std::ostream& out, std::ostream&) { return cmd_methods(out); }};
}

}  // namespace covergrid::cli
