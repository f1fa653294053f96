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

/// The lines of a text, without their line ends.
inline std::vector<std::string> split_lines(const std::string& text) {
  std::vector<std::string> out;
  std::size_t start = 0;
  while (start < text.size()) {
    const auto end = text.find('\n', start);
    out.push_back(text.substr(start, end - start));
    if (end == std::string::npos) break;
    start = end + 1;
  }
  return out;
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
