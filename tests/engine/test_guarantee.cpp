// The methods the registry marks `guaranteed` keep coverage at or above
// nominal at every n and p (proven property of inversions of exact tail
// tests: Clopper & Pearson 1934; Blaker 2000, Theorem 1), checked with exact
// enumeration on a dense grid under the shared decision slack; and the mark
// is on exactly the methods the tables group as guaranteed.
#include "covergrid/engine/coverage_rule.hpp"
#include "covergrid/engine/exact.hpp"
#include "covergrid/engine/interval_table.hpp"
#include "covergrid/methods/registry.hpp"

#include <catch2/catch.hpp>

#include <set>
#include <string>

using namespace covergrid;

TEST_CASE("methods marked guaranteed never cover below nominal", "[engine][guarantee]") {
  std::set<std::string> marked;
  for (const auto& e : methods::registry()) {
    if (!e.info.guaranteed) continue;
    marked.insert(e.info.id);
    const auto m = methods::make_instance(e.info.id, {});
    for (double level : {0.90, 0.95}) {
      for (int n = 1; n <= 40; ++n) {
        const auto table = engine::build_table(*m.method, n, level, methods::Side::two_sided);
        double worst = 1;
        for (int k = 1; k < 400; ++k)
          worst = std::min(worst, engine::coverage_by_enumeration(table, k / 400.0));
        INFO(e.info.id << " n = " << n << " level " << level);
        CHECK(engine::meets_coverage(worst, level));
      }
    }
  }
  // exact-hypergeometric is Clopper-Pearson under the binomial model (no
  // population); tests/engine/test_hypergeometric.cpp holds it to its
  // guarantee under a finite population.
  CHECK(marked == std::set<std::string>{"clopper-pearson", "blaker", "exact-hypergeometric"});
}

TEST_CASE("an unguaranteed method is caught by the same check", "[engine][guarantee]") {
  // Negative control: mid-p (an exact-tail family member without the
  // guarantee) drops below nominal on the same grid.
  const auto m = methods::make_instance("mid-p", {});
  double worst = 1;
  for (int n = 1; n <= 40; ++n) {
    const auto table = engine::build_table(*m.method, n, 0.95, methods::Side::two_sided);
    for (int k = 1; k < 400; ++k) worst = std::min(worst, engine::coverage_by_enumeration(table, k / 400.0));
  }
  CHECK_FALSE(engine::meets_coverage(worst, 0.95));
}
