// run_cli(): builds the command set, parses, and maps errors to exit statuses.
#include "commands.hpp"
#include "covergrid/output/tables.hpp"
#include "covergrid/version.hpp"

#include <fmt/format.h>

#include <ostream>

namespace covergrid::cli {

namespace {

/// A bad-input message as one line: control characters that came from the
/// input (a newline or tab inside a string value) are written as escapes.
std::string one_line(const std::string& message) {
  std::string out;
  for (const char ch : message) {
    if (ch == '\n')
      out += "\\n";
    else if (ch == '\t')
      out += "\\t";
    else if (ch == '\r')
      out += "\\r";
    else if (static_cast<unsigned char>(ch) < 0x20 || ch == 0x7f)
      out += fmt::format("\\x{:02x}", static_cast<unsigned>(static_cast<unsigned char>(ch)));
    else
      out += ch;
  }
  return out;
}

}  // namespace

int run_cli(const std::vector<std::string>& args, std::ostream& out, std::ostream& err) {
  CLI::App app{fmt::format("covergrid {} — how confidence intervals for a proportion really behave: exact\n"
                           "coverage, tail misses and width of interval methods over grids of n and p.",
                           tool_version),
               "covergrid"};
  app.require_subcommand(1);
  app.set_version_flag("--version", std::string(tool_version));
  app.footer(std::string(1, '\n').append(output::wrap_text(output::coverage_caution, 100)));

  std::vector<Command> commands;
  commands.push_back(add_run_command(app));
  commands.push_back(add_intervals_command(app));
  commands.push_back(add_methods_command(app));
  commands.push_back(add_inspect_command(app));
  commands.push_back(add_audit_command(app));
  commands.push_back(add_plan_command(app));
  commands.push_back(add_rank_command(app));
  commands.push_back(add_merge_command(app));
  commands.push_back(add_report_command(app));

  if (!args.empty() && !args[0].empty() && args[0][0] != '-') {
    std::string names;
    bool known = false;
    for (const CLI::App* sub : app.get_subcommands([](CLI::App*) { return true; })) {
      known |= sub->get_name() == args[0];
      names += (names.empty() ? "" : ", ") + sub->get_name();
    }
    if (!known) {
      err << fmt::format("covergrid: unknown command '{}' (commands: {})\n(see covergrid --help)\n", args[0],
                         names);
      return exit_bad_input;
    }
  }
  try {
    std::vector<std::string> reversed(args.rbegin(), args.rend());
    app.parse(reversed);
  } catch (const CLI::CallForHelp&) {
    out << app.help();
    return exit_ok;
  } catch (const CLI::CallForAllHelp&) {
    out << app.help("", CLI::AppFormatMode::All);
    return exit_ok;
  } catch (const CLI::CallForVersion&) {
    out << tool_version << '\n';
    return exit_ok;
  } catch (const CLI::ParseError& e) {
    err << "covergrid: " << e.what() << "\n(see covergrid --help)\n";
    return exit_bad_input;
  }

  try {
    for (const auto& c : commands)
      if (c.app->parsed()) return c.run(out, err);
  } catch (const InputError& e) {
    err << "covergrid: " << one_line(e.what()) << '\n';
    return exit_bad_input;
  } catch (const std::exception& e) {
    err << "covergrid: internal error: " << e.what() << '\n';
    return exit_internal;
  }
  return exit_internal;
}

}  // namespace covergrid::cli
