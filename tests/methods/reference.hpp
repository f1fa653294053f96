#pragma once
// Reads tests/data/reference_intervals.csv (written by
// scripts/gen-reference-intervals from mpmath at 30-40 significant digits,
// cross-checked there against SciPy and statsmodels; the file's header names
// the versions) and compares one method's limits with it.
#include "covergrid/methods/interval.hpp"
#include "covergrid/methods/registry.hpp"

#include <catch2/catch.hpp>
#include <fmt/format.h>

#include <cmath>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

namespace covergrid::test {

struct ReferenceRow {
  std::string method, params;
  int x = 0, n = 0;
  double level = 0;
  methods::Side side{};
  double lower = 0, upper = 0;
};

inline std::vector<ReferenceRow> reference_rows() {
  static const std::vector<ReferenceRow> rows = [] {
    std::vector<ReferenceRow> out;
    std::ifstream in(std::string(COVERGRID_TEST_DATA) + "/reference_intervals.csv");
    REQUIRE(in.good());
    std::string line;
    bool header = false;
    while (std::getline(in, line)) {
      if (line.empty() || line[0] == '#') continue;
      if (!header) {
        header = true;  // method,params,x,n,level,side,lower,upper
        continue;
      }
      std::vector<std::string> f;
      std::stringstream ss(line);
      std::string item;
      while (std::getline(ss, item, ',')) f.push_back(item);
      if (line.back() == ',') f.emplace_back();
      REQUIRE(f.size() == 8);
      ReferenceRow r;
      r.method = f[0];
      r.params = f[1];
      r.x = std::stoi(f[2]);
      r.n = std::stoi(f[3]);
      r.level = std::stod(f[4]);
      REQUIRE(methods::parse_side(f[5], r.side));
      r.lower = std::stod(f[6]);
      r.upper = std::stod(f[7]);
      out.push_back(r);
    }
    return out;
  }();
  return rows;
}

/// "a=0.5;b=0.5" or "boundary=false" -> parameter values.
inline methods::ParamValues parse_reference_params(const std::string& text) {
  methods::ParamValues out;
  std::stringstream ss(text);
  std::string item;
  while (std::getline(ss, item, ';')) {
    if (item.empty()) continue;
    const auto eq = item.find('=');
    const std::string k = item.substr(0, eq), v = item.substr(eq + 1);
    if (v == "true" || v == "false")
      out[k] = (v == "true");
    else {
      char* end = nullptr;
      const double d = std::strtod(v.c_str(), &end);
      if (*end == '\0')
        out[k] = d;
      else
        out[k] = v;
    }
  }
  return out;
}

/// Tolerance on a limit: our roots are solved to 4e-14 relative and Boost.Math
/// (promote_double<false>) is accurate to a few 1e-14 relative, so 1e-11
/// absolute plus 1e-10 relative leaves a margin of 100 over what we expect.
inline double reference_tolerance(double ref) { return 1e-11 + 1e-10 * std::fabs(ref); }

/// Compares every reference row of `method_id`; returns the number compared.
inline std::size_t check_against_reference(const std::string& method_id) {
  std::size_t count = 0;
  double worst = 0;
  std::string worst_row;
  for (const auto& r : reference_rows()) {
    if (r.method != method_id) continue;
    const auto inst = methods::make_instance(r.method, parse_reference_params(r.params));
    const auto lim = methods::interval(*inst.method, r.x, r.n, r.level, r.side);
    const double el = std::fabs(lim.lower - r.lower), eu = std::fabs(lim.upper - r.upper);
    const double excess = std::max(el / reference_tolerance(r.lower), eu / reference_tolerance(r.upper));
    if (excess > worst) {
      worst = excess;
      worst_row = fmt::format(
          "{}({}) x={} n={} level={} {}: ours [{:.17g}, {:.17g}] reference [{:.17g}, {:.17g}]", r.method,
          r.params, r.x, r.n, r.level, methods::side_name(r.side), lim.lower, lim.upper, r.lower, r.upper);
    }
    ++count;
  }
  INFO("worst row (error / tolerance = " << worst << "): " << worst_row);
  CHECK(count > 0);
  CHECK(worst <= 1.0);
  return count;
}

}  // namespace covergrid::test
