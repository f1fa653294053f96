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

/// The fields of one CSV line ("..." quoting, no embedded newlines).
inline std::vector<std::string> split_csv_line(const std::string& line) {
  std::vector<std::string> fields;
  std::string field;
  bool quoted = false;
  for (char ch : line) {
    if (ch == '"') {
      quoted = !quoted;
    } else if (ch == ',' && !quoted) {
      fields.push_back(field);
      field.clear();
    } else {
      field += ch;
    }
  }
  fields.push_back(field);
  return fields;
}

inline std::string slurp(const std::filesystem::path& p) {
  std::ifstream in(p);
  return std::string(std::istreambuf_iterator<char>(in), {});
}

}  // namespace covergrid::test
