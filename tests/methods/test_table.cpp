// The table method: limits read from a CSV file (tests/data/tables/, written
// by hand for these tests: the numbers are invented, not reference values).
// Good files are read in any column order, with or without level and side
// columns; each kind of fault is refused with the file, line and column.
#include "covergrid/methods/interval.hpp"
#include "covergrid/methods/registry.hpp"

#include <catch2/catch.hpp>

#include <string>

namespace m = covergrid::methods;

namespace {

std::string table_file(const std::string& name) {
  return std::string(COVERGRID_TEST_DATA) + "/tables/" + name;
}

m::MethodInstance table(const std::string& name) {
  return m::make_instance("table", {{"file", table_file(name)}});
}

}  // namespace

TEST_CASE("a table serves its limits at every level and side when it names none", "[methods][table]") {
  const auto t = table("good.csv");
  CHECK(t.label == "table(file=good.csv)");  // the file name, not its folder
  for (double level : {0.9, 0.95}) {
    const auto two = m::interval(*t.method, 1, 2, level, m::Side::two_sided);
    CHECK(two.lower == 0.1);
    CHECK(two.upper == 0.9);
    const auto low = m::interval(*t.method, 1, 3, level, m::Side::lower_bound);
    CHECK(low.lower == 0.05);
    CHECK(low.upper == 1.0);
    const auto up = m::interval(*t.method, 2, 3, level, m::Side::upper_bound);
    CHECK(up.lower == 0.0);
    CHECK(up.upper == 0.95);
  }
  CHECK(t.method->missing(2, 0.95, m::Side::two_sided).empty());
  CHECK(t.method->missing(3, 0.95, m::Side::two_sided).empty());
  CHECK(t.method->missing(4, 0.95, m::Side::two_sided).find("no row for n = 4, x = 0") != std::string::npos);
  CHECK_THROWS_AS(m::interval(*t.method, 0, 4, 0.95, m::Side::two_sided), m::NumericalError);
}

TEST_CASE("a table with level and side columns serves exactly those", "[methods][table]") {
  const auto t = table("sided.csv");
  CHECK(t.method->supports(m::Side::two_sided));
  CHECK(t.method->supports(m::Side::lower_bound));
  CHECK_FALSE(t.method->supports(m::Side::upper_bound));
  const auto two = m::interval(*t.method, 1, 2, 0.95, m::Side::two_sided);
  CHECK(two.lower == 0.1);
  CHECK(two.upper == 0.9);
  CHECK(m::interval(*t.method, 1, 2, 0.95, m::Side::lower_bound).lower == 0.2);
  const std::string miss = t.method->missing(2, 0.9, m::Side::two_sided);
  CHECK(miss.find("no row for n = 2, x = 0, level = 0.9, side = two-sided") != std::string::npos);
  CHECK_THROWS_AS(m::interval(*t.method, 1, 2, 0.9, m::Side::two_sided), m::NumericalError);
}

TEST_CASE("a damaged table is refused with its file, line and column", "[methods][table]") {
  const std::pair<const char*, const char*> cases[] = {
      {"non-numeric.csv", ":3: column 'upper': \"abc\" is not a number"},
      {"lower-above-upper.csv", ":3: lower 0.7 is above upper 0.5"},
      {"outside.csv", ":3: column 'lower': -0.1 is outside [0, 1]"},
      {"duplicate.csv", ":4: duplicates line 2"},
      {"bad-header.csv", ":1: column 'low' is not one of n, x, lower, upper, level, side"},
      {"x-above-n.csv", ":2: column 'x': 3 is not a whole number in 0..2"},
      {"short-row.csv", ":2: 3 fields where the header names 4"},
      {"no-such-file.csv", ": cannot open the interval table"},
  };
  for (const auto& [name, expected] : cases) {
    INFO(name);
    try {
      table(name);
      FAIL("expected a ParameterError");
    } catch (const m::ParameterError& e) {
      CHECK(e.key() == "file");
      const std::string what = e.what();
      CHECK(what.find(table_file(name) + expected) != std::string::npos);
      CHECK(what.find('\n') == std::string::npos);
    }
  }
  // A file with a gap is read; the gap is found for the n that needs it.
  const auto gap = table("missing-x.csv");
  CHECK(gap.method->missing(2, 0.95, m::Side::two_sided).find("no row for n = 2, x = 1") !=
        std::string::npos);
  CHECK_THROWS_AS(m::make_instance("table", {}), m::ParameterError);
}
