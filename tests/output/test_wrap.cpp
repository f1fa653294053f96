// Terminal wrapping of the cautions.
#include "covergrid/output/tables.hpp"

#include <catch2/catch.hpp>

#include <sstream>

TEST_CASE("text is wrapped at spaces within the width, losing no word", "[output][tables]") {
  const std::string text = covergrid::output::coverage_caution;
  const std::string wrapped = covergrid::output::wrap_text(text, 40);
  std::istringstream lines(wrapped);
  std::string line, joined;
  int count = 0;
  for (; std::getline(lines, line); ++count) {
    CHECK(line.size() <= 40);
    CHECK_FALSE(line.empty());
    joined += (joined.empty() ? "" : " ") + line;
  }
  CHECK(count > 3);
  CHECK(joined == text);
  CHECK(covergrid::output::wrap_text("short", 40) == "short\n");
}
