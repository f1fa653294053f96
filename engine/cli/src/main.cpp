#include "covergrid/cli/cli.hpp"

#include <unistd.h>

#include <cstring>
#include <iostream>
#include <ostream>
#include <sstream>
#include <string>

#ifdef COVERGRID_MPI
#include "mpi_run.hpp"
#endif

namespace {

/// Runs the command with its normal output on file descriptor 1. A write
/// there that failed (a full disk, a closed pipe) is exit 1 with one line
/// saying so, never a silent exit 0 (or a verdict's 3 or 4) with the output
/// lost.
int run_to_standard_output(const std::vector<std::string>& args) {
  covergrid::cli::FdOutput buffer(STDOUT_FILENO);
  std::ostream out(&buffer);
  const int status = covergrid::cli::run_cli(args, out, std::cerr);
  out.flush();
  if (buffer.error() == 0) return status;
  std::cerr << "covergrid: cannot write standard output: " << std::strerror(buffer.error()) << '\n';
  return covergrid::cli::exit_internal;
}

}  // namespace

int main(int argc, char** argv) {
#ifdef COVERGRID_MPI
  covergrid::cli::mpi::Session session(&argc, &argv);
  std::vector<std::string> args(argv + 1, argv + argc);
  if (covergrid::cli::mpi::rank() > 0) {
    // Rank 0 speaks for the job; the others only take part in `run`.
    if (args.empty() || args[0] != "run") return session.finish(0);
    std::ostringstream out, err;
    return session.finish(covergrid::cli::run_cli(args, out, err));
  }
  return session.finish(run_to_standard_output(args));
#else
  std::vector<std::string> args(argv + 1, argv + argc);
  return run_to_standard_output(args);
#endif
}
