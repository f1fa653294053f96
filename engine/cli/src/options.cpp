#include "commands.hpp"

#include "covergrid/methods/limits.hpp"
#include "covergrid/scenarios/claims.hpp"
#include "covergrid/scenarios/loader.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cerrno>
#include <cmath>
#include <cstdlib>

namespace covergrid::cli {

namespace {

/// "id" or "id:key=value,..." -> the id and the values (true/false, numbers,
/// else text).
std::pair<std::string, methods::ParamValues> parse_spec(const std::string& text, const std::string& option,
                                                        const char* example) {
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
                         fmt::format("parameters are written key=value, e.g. {}", example));
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
  return {id, given};
}

}  // namespace

methods::MethodInstance parse_method_option(const std::string& text, const std::string& option) {
  const auto [id, given] = parse_spec(text, option, "jeffreys:boundary=false");
  try {
    return methods::make_instance(id, given);
  } catch (const methods::ParameterError& e) {
    throw InputError(option + " " + text, e.what());
  }
}

std::shared_ptr<const engine::SamplingModel> parse_model_option(const std::string& text,
                                                                const std::string& option) {
  const auto [kind, given] = parse_spec(text, option, "hypergeometric:population=5000");
  try {
    return engine::make_model(kind, given);
  } catch (const methods::ParameterError& e) {
    throw InputError(option + " " + text, e.what());
  }
}

namespace {

bool parse_long(const std::string& s, long& out) {
  // strtol saturates at LONG_MAX with ERANGE: a value out of range is not
  // a number we accept.
  char* end = nullptr;
  errno = 0;
  out = std::strtol(s.c_str(), &end, 10);
  return !s.empty() && end && *end == '\0' && errno != ERANGE;
}

bool parse_double(const std::string& s, double& out) {
  char* end = nullptr;
  out = std::strtod(s.c_str(), &end);
  return !s.empty() && end && *end == '\0' && std::isfinite(out);
}

std::vector<std::string> split(const std::string& s, char sep) {
  std::vector<std::string> parts;
  std::size_t start = 0;
  while (true) {
    const auto at = s.find(sep, start);
    parts.push_back(s.substr(start, at - start));
    if (at == std::string::npos) break;
    start = at + 1;
  }
  return parts;
}

}  // namespace

std::vector<int> parse_n_set(const std::string& text, const std::string& option) {
  const std::string where = option + " " + text;
  auto value = [&](const std::string& s) {
    long v = 0;
    if (!parse_long(s, v)) throw InputError(where, fmt::format("\"{}\" is not a whole number", s));
    if (v < 1) throw InputError(where, fmt::format("n = {} is below 1", v));
    if (v > scenarios::max_sample_size)
      throw InputError(
          where, fmt::format("n = {} is above the largest supported n ({})", v, scenarios::max_sample_size));
    return static_cast<int>(v);
  };
  std::vector<int> out;
  if (text.find(':') != std::string::npos) {
    const auto parts = split(text, ':');
    if (parts.size() > 3) throw InputError(where, "write A:B or A:B:STEP");
    const int a = value(parts[0]), b = value(parts[1]);
    long step = 1;
    if (parts.size() == 3 && (!parse_long(parts[2], step) || step < 1))
      throw InputError(where, "the step must be a whole number of at least 1");
    if (b < a) throw InputError(where, fmt::format("the range {}..{} is empty", a, b));
    // Counted, never stepped past b (a + step can overflow for a huge step).
    const long count = (long{b} - a) / step + 1;
    if (static_cast<std::size_t>(count) > scenarios::max_claim_n_count)
      throw InputError(where, fmt::format("more than {} values", scenarios::max_claim_n_count));
    for (long k = 0; k < count; ++k) out.push_back(static_cast<int>(a + k * step));
  } else {
    for (const auto& part : split(text, ',')) out.push_back(value(part));
    std::sort(out.begin(), out.end());
    if (std::adjacent_find(out.begin(), out.end()) != out.end())
      throw InputError(where, "lists a value twice");
  }
  return out;
}

std::pair<double, double> parse_p_range(const std::string& text, const std::string& option) {
  const std::string where = option + " " + text;
  const auto parts = split(text, ':');
  if (parts.size() > 2) throw InputError(where, "write LO:HI or one value");
  double lo = 0, hi = 0;
  if (!parse_double(parts[0], lo) || (parts.size() == 2 && !parse_double(parts[1], hi)))
    throw InputError(where, "write LO:HI with two numbers in [0, 1], e.g. 0.01:0.99");
  if (parts.size() == 1) hi = lo;
  if (!(lo >= 0 && lo <= 1 && hi >= 0 && hi <= 1)) throw InputError(where, "p must lie in [0, 1]");
  if (hi < lo) throw InputError(where, fmt::format("the range [{:g}, {:g}] is empty", lo, hi));
  return {lo, hi};
}

methods::Side parse_side_option(const std::string& text, const std::string& option) {
  methods::Side side{};
  if (!methods::parse_side(text, side))
    throw InputError(option, fmt::format("\"{}\" is not one of two-sided, lower-bound, upper-bound", text));
  return side;
}

void check_level(double level, const std::string& option) {
  if (!methods::level_in_range(level))
    throw InputError(option, fmt::format("{:g} is outside {} (the levels every method computes; README, "
                                         "\"Numerical limits\")",
                                         level, methods::level_range_text));
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
      "");
}

}  // namespace covergrid::cli
