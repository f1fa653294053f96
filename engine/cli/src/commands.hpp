#pragma once
/// The subcommands of the front end, one file each. Every add_*_command()
/// declares its options on `app` (bound to state the returned Command owns)
/// and returns what runs it once parsing succeeded. run_cli() (cli.cpp)
/// lists them, parses, and maps errors to exit statuses.
#include "covergrid/cli/cli.hpp"
#include "covergrid/engine/error.hpp"
#include "covergrid/methods/registry.hpp"

#include <CLI/CLI.hpp>

#include <functional>
#include <ostream>
#include <string>

namespace covergrid::cli {

struct Command {
  CLI::App* app = nullptr;
  std::function<int(std::ostream& out, std::ostream& err)> run;
};

Command add_run_command(CLI::App& app);
Command add_intervals_command(CLI::App& app);
Command add_methods_command(CLI::App& app);
Command add_inspect_command(CLI::App& app);
Command add_report_command(CLI::App& app);

/// Parses "id" or "id:key=value,key=value" into a method instance; errors
/// name `option` (e.g. "--method").
methods::MethodInstance parse_method_option(const std::string& text, const std::string& option = "--method");

/// A CLI11 check for an integer option in [lo, hi].
CLI::Validator integer_in(long lo, long hi);

}  // namespace covergrid::cli
