#pragma once
/// The subcommands of the front end, one file each. Every add_*_command()
/// declares its options on `app` (bound to state the returned Command owns)
/// and returns what runs it once parsing succeeded. run_cli() (cli.cpp)
/// lists them, parses, and maps errors to exit statuses.
#include "covergrid/cli/cli.hpp"
#include "covergrid/engine/error.hpp"
#include "covergrid/engine/sampling_model.hpp"
#include "covergrid/methods/registry.hpp"

#include <CLI/CLI.hpp>

#include <functional>
#include <ostream>
#include <string>
#include <utility>
#include <vector>

namespace covergrid::cli {

struct Command {
  CLI::App* app = nullptr;
  std::function<int(std::ostream& out, std::ostream& err)> run;
};

Command add_run_command(CLI::App& app);
Command add_intervals_command(CLI::App& app);
Command add_methods_command(CLI::App& app);
Command add_inspect_command(CLI::App& app);
Command add_audit_command(CLI::App& app);
Command add_plan_command(CLI::App& app);
Command add_rank_command(CLI::App& app);
Command add_merge_command(CLI::App& app);
Command add_report_command(CLI::App& app);

/// Parses "id" or "id:key=value,key=value" into a method instance; errors
/// name `option` (e.g. "--method").
methods::MethodInstance parse_method_option(const std::string& text, const std::string& option = "--method");
/// "kind" or "kind:key=value,..." (e.g. hypergeometric:population=5000) -> the sampling model.
std::shared_ptr<const engine::SamplingModel> parse_model_option(const std::string& text,
                                                                const std::string& option = "--model");

/// "A:B" (every n from A to B), "A:B:S" (step S), "A,B,C" or "A".
std::vector<int> parse_n_set(const std::string& text, const std::string& option);
/// "LO:HI" or one value, inside [0, 1].
std::pair<double, double> parse_p_range(const std::string& text, const std::string& option);
/// two-sided, lower-bound or upper-bound.
methods::Side parse_side_option(const std::string& text, const std::string& option);
/// A level in [methods::min_level, methods::max_level] (README, "Numerical limits").
void check_level(double level, const std::string& option);

/// A CLI11 check for an integer option in [lo, hi]; it adds nothing to the
/// help text, so give the option type_name("LO..HI").
CLI::Validator integer_in(long lo, long hi);

}  // namespace covergrid::cli
