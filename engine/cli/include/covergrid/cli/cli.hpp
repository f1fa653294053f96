#pragma once
/// The command-line front end as a library call, so that tests reach every
/// command without a subprocess. main() only forwards to run_cli().
#include <iosfwd>
#include <string>
#include <vector>

namespace covergrid::cli {

/// Exit statuses (README, "Commands"): 0 success, 1 internal failure or an
/// interrupted run, 2 bad input, 3 a claim refuted, 4 inconclusive, 5 no n
/// in a plan's range.
enum Exit : int {
  exit_ok = 0,
  exit_internal = 1,
  exit_bad_input = 2,
  exit_refuted = 3,
  exit_inconclusive = 4,
  exit_no_n = 5,  // plan: no n in the search range meets the requirements
};

/// Runs `covergrid <args...>` (args excludes the program name) and returns the
/// exit status; normal output goes to `out`, messages and progress to `err`.
int run_cli(const std::vector<std::string>& args, std::ostream& out, std::ostream& err);

}  // namespace covergrid::cli
