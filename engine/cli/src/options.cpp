#include "commands.hpp"

#include <cstdlib>

namespace covergrid::cli {

methods::MethodInstance parse_method_option(const std::string& text, const std::string& option) {
  const auto colon = text.find(':');
  const std::string id = text.substr(0, colon);
  methods::ParamValues given;
  if (colon != std::string::npos) {
    std::string rest = text.substr(colon + 1);
    std::size_t start = 0;
    while (start <= rest.size()) {
      const auto comma = rest.find(',', start);
      const std::string item = rest.substr(start, comma - start);
      const auto eq = item.find('=');
      if (eq == std::string::npos || eq == 0)
        throw InputError(option + " " + text,
                         "parameters are written key=value, e.g. jeffreys:boundary=false");
      const std::string key = item.substr(0, eq), value = item.substr(eq + 1);
      if (value == "true" || value == "false")
        given[key] = value == "true";
      else {
        char* end = nullptr;
        const double d = std::strtod(value.c_str(), &end);
        if (end && *end == '\0' && !value.empty())
          given[key] = d;
        else
          given[key] = value;
      }
      if (comma == std::string::npos) break;
      start = comma + 1;
    }
  }
  try {
    return methods::make_instance(id, given);
  } catch (const methods::ParameterError& e) {
    throw InputError(option + " " + text, e.what());
  }
}

CLI::Validator integer_in(long lo, long hi) {
  return CLI::Validator(
      [lo, hi](std::string& v) {
        char* end = nullptr;
        const long k = std::strtol(v.c_str(), &end, 10);
        return (end && *end == '\0' && !v.empty() && k >= lo && k <= hi)
                   ? std::string()
                   : "must be an integer from " + std::to_string(lo) + " to " + std::to_string(hi);
      },
      "INT");
}

}  // namespace covergrid::cli
