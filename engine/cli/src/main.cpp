#include "covergrid/cli/cli.hpp"

#include <iostream>
#include <sstream>

#ifdef COVERGRID_MPI
#include "mpi_run.hpp"
#endif

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
  return session.finish(covergrid::cli::run_cli(args, std::cout, std::cerr));
#else
  std::vector<std::string> args(argv + 1, argv + argc);
  return covergrid::cli::run_cli(args, std::cout, std::cerr);
#endif
}
