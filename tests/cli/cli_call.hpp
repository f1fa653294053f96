#pragma once
// The command line called in-process (run_cli), and reading a file whole:
// shared by the command-line tests.
#include "covergrid/cli/cli.hpp"

#include <filesystem>
#include <fstream>
#include <iterator>
#include <sstream>
#include <string>
#include <vector>

namespace covergrid::test {

struct CliResult {
  int status;
  std::string out, err;
};

/// `covergrid <args...>` through run_cli(): exit status, stdout and stderr.
inline CliResult call(const std::vector<std::string>& args) {
  std::ostringstream out, err;
  const int status = covergrid::cli::run_cli(args, out, err);
  return {status, out.str(), err.str()};
}

inline std::string slurp(const std::filesystem::path& p) {
  std::ifstream in(p);
  return std::string(std::istreambuf_iterator<char>(in), {});
}

}  // namespace covergrid::test
