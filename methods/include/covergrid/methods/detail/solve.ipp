#pragma once
#include <boost/math/tools/toms748_solve.hpp>

#include <string>

namespace covergrid::methods {

template <class F>
double solve_bracketed(F f, double lo, double hi, const char* what, bool clamp) {
  const double flo = f(lo);
  const double fhi = f(hi);
  if (flo == 0.0) return lo;
  if (fhi == 0.0) return hi;
  if ((flo < 0) == (fhi < 0)) {
    if (!clamp) throw NumericalError(std::string(what) + ": root is not bracketed");
    return std::fabs(flo) < std::fabs(fhi) ? lo : hi;
  }
  std::uintmax_t iterations = root_max_iterations;
  const auto r =
      boost::math::tools::toms748_solve(f, lo, hi, flo, fhi, root_tolerance{}, iterations, math_policy{});
  if (iterations >= root_max_iterations)
    throw NumericalError(std::string(what) + ": root finder hit its iteration limit");
  return 0.5 * (r.first + r.second);
}

}  // namespace covergrid::methods
