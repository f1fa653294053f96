#pragma once
/// The one error type for bad input: it carries where (file, line, key or
/// option) and what, and the front end maps it to exit status 2.
#include <stdexcept>
#include <string>

namespace covergrid {

class InputError : public std::runtime_error {
 public:
  /// `where` is "file:line" or "file" or "--option"; `what` the rule broken.
  InputError(const std::string& where, const std::string& what)
      : std::runtime_error(where.empty() ? what : where + ": " + what) {}
  explicit InputError(const std::string& what) : std::runtime_error(what) {}
};

}  // namespace covergrid
