// The table method end to end: a table written from Wilson's limits (at 17
// significant digits, so every double survives) gives the cube Wilson's own
// values; a grid n without rows, and a damaged table, are refused before
// anything runs (exit 2, the file named); audit and plan take a table from
// the command line; the bundled rounded table's claim is refuted. The
// tables are invented for these tests.
#include "e2e.hpp"
#include "support.hpp"

#include "cli_call.hpp"
#include "covergrid/methods/registry.hpp"
#include "covergrid/output/cube.hpp"

#include <catch2/catch.hpp>
#include <fmt/format.h>

#include <algorithm>
#include <cstring>
#include <fstream>

using covergrid::test::call;
namespace m = covergrid::methods;
namespace o = covergrid::output;
using namespace covergrid::test;

namespace {

/// Wilson's 95 % two-sided limits for n in [from, to], as a table file.
void write_wilson_table(const std::filesystem::path& path, int from, int to) {
  const auto wilson = m::make_instance("wilson", {});
  std::ofstream out(path);
  out << "# Wilson's limits, written by the test\nn,x,lower,upper,level,side\n";
  for (int n = from; n <= to; ++n)
    for (int x = 0; x <= n; ++x) {
      const auto l = m::interval(*wilson.method, x, n, 0.95, m::Side::two_sided);
      out << fmt::format("{},{},{:.17g},{:.17g},0.95,two-sided\n", n, x, l.lower, l.upper);
    }
}

const char* scenario = R"(
title = "a table against the method it tabulates"
[grid]
n = { from = 5, to = 30 }
p = { from = 0.01, to = 0.99, count = 99 }
levels = 0.95
[[method]]
id = "wilson"
[[method]]
id = "table"
file = "tables/wilson.csv"
label = "sheet"
[output]
cube = "t.h5"
tables = ""
)";

}  // namespace

TEST_CASE("a table of a method's limits evaluates to that method's values", "[cli][table]") {
  ScratchDir dir("table-wilson");
  std::filesystem::create_directories(dir.path() / "tables");
  write_wilson_table(dir.path() / "tables" / "wilson.csv", 5, 30);
  std::ofstream(dir.path() / "t.toml") << scenario;
  // Run from elsewhere: the file is found beside the scenario.
  const auto r = call({"run", dir.file("t.toml"), "--quiet"});
  INFO(r.err);
  REQUIRE(r.status == 0);
  const o::CubeReader cube(dir.file("t.h5"));
  REQUIRE(cube.methods == std::vector<std::string>{"wilson", "sheet"});
  CHECK(cube.method_info.at("sheet").at("param.file") == (dir.path() / "tables" / "wilson.csv").string());
  for (const char* metric : {"coverage", "width", "miss_low"})
    for (std::size_t ni = 0; ni < cube.n.size(); ++ni) {
      const auto a = cube.exact_row(metric, 0, 0, 0, 0, ni), b = cube.exact_row(metric, 0, 0, 0, 1, ni);
      REQUIRE(a.size() == b.size());
      CHECK(std::memcmp(a.data(), b.data(), a.size() * sizeof(double)) == 0);
    }
  const auto inf = cube.summary("inf_coverage");
  for (std::size_t ni = 0; ni < cube.n.size(); ++ni)
    CHECK(inf[cube.summary_index(0, 0, 0, 0, ni)] == inf[cube.summary_index(0, 0, 0, 1, ni)]);
  CHECK(call({"rank", dir.file("t.h5")}).status == 0);
}

TEST_CASE("a table without rows for the grid, or a damaged one, is refused before the run", "[cli][table]") {
  ScratchDir dir("table-refused");
  std::filesystem::create_directories(dir.path() / "tables");
  write_wilson_table(dir.path() / "tables" / "wilson.csv", 5, 20);  // the grid goes to 30
  std::ofstream(dir.path() / "t.toml") << scenario;
  auto r = call({"run", dir.file("t.toml"), "--quiet"});
  CHECK(r.status == 2);
  CHECK(r.err.find("t.toml:11") != std::string::npos);  // the file key
  CHECK(r.err.find("wilson.csv has no row for n = 21, x = 0") != std::string::npos);
  CHECK(std::count(r.err.begin(), r.err.end(), '\n') == 1);
  CHECK_FALSE(std::filesystem::exists(dir.path() / "t.h5"));
  // A damaged row: the table's own file, line and column.
  std::ofstream(dir.path() / "tables" / "wilson.csv", std::ios::app) << "21,0,0,zero,0.95,two-sided\n";
  r = call({"run", dir.file("t.toml"), "--quiet"});
  CHECK(r.status == 2);
  CHECK(r.err.find("column 'upper': \"zero\" is not a number") != std::string::npos);
  CHECK_FALSE(std::filesystem::exists(dir.path() / "t.h5"));
}

TEST_CASE("audit and plan take a table on the command line", "[cli][table]") {
  ScratchDir dir("table-options");
  write_wilson_table(dir.path() / "w.csv", 1, 60);
  const std::string spec = "table:file=" + dir.file("w.csv");
  // The table's verdict is Wilson's, figure for figure.
  auto field_of = [](const std::string& csv, const std::string& name) {
    const auto nl = csv.find('\n');
    const auto header = split_csv_line(csv.substr(0, nl));
    const auto row = split_csv_line(csv.substr(nl + 1, csv.find('\n', nl + 1) - nl - 1));
    const auto at = std::find(header.begin(), header.end(), name);
    REQUIRE(at != header.end());
    return row[static_cast<std::size_t>(at - header.begin())];
  };
  const auto t = call(
      {"audit", "--method", spec, "--level", "0.95", "--n", "10:60", "--p", "0.05:0.95", "--format", "csv"});
  const auto w = call({"audit", "--method", "wilson", "--level", "0.95", "--n", "10:60", "--p", "0.05:0.95",
                       "--format", "csv"});
  CHECK(t.status == w.status);
  CHECK(field_of(t.out, "worst_coverage") == field_of(w.out, "worst_coverage"));
  CHECK(field_of(t.out, "worst_n") == field_of(w.out, "worst_n"));
  // n past the table, and a level it does not hold: exit 2 naming the table.
  auto r = call({"audit", "--method", spec, "--level", "0.95", "--n", "10:61", "--p", "0.05:0.95"});
  CHECK(r.status == 2);
  CHECK(r.err.find("no row for n = 61") != std::string::npos);
  r = call({"audit", "--method", spec, "--level", "0.9", "--n", "10:60", "--p", "0.05:0.95"});
  CHECK(r.status == 2);
  CHECK(r.err.find("level = 0.9") != std::string::npos);
  r = call({"plan", "--method", spec, "--level", "0.95", "--max-width", "0.3", "--p", "0.05:0.95", "--n",
            "1:100"});
  CHECK(r.status == 2);
  CHECK(r.err.find("plan searches every n") != std::string::npos);
  r = call(
      {"plan", "--method", spec, "--level", "0.95", "--max-width", "0.3", "--p", "0.05:0.95", "--n", "1:60"});
  CHECK(r.status == 0);
}

TEST_CASE("the bundled rounded table's claim is refuted", "[cli][table]") {
  const auto r =
      call({"audit", "--claims", std::string(COVERGRID_SCENARIO_DIR) + "/claims/rounded-exact-claim.toml",
            "--format", "csv"});
  INFO(r.err);
  CHECK(r.status == 3);  // refuted
  CHECK(r.out.find("refuted") != std::string::npos);
}
