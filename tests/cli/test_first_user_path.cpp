// The first-user path end to end: the demo, then rank, audit, plan and report
// on its cube, and the commands agree with each other: the headline's first
// method is rank's; audit's verdict for every method is what the headline's
// "below nominal" mark says, at the same worst n and coverage as the cube;
// plan's first n and stable n for a coverage requirement are the ones the
// cube's exact infima give; the report is written from the same cube.
#include "support.hpp"

#include "cli_call.hpp"
#include "covergrid/engine/coverage_rule.hpp"
#include "covergrid/output/cube.hpp"

#include <catch2/catch.hpp>
#include <fmt/format.h>

#include <algorithm>
#include <filesystem>
#include <sstream>

namespace fs = std::filesystem;
using covergrid::test::call;
using covergrid::test::ScratchDir;
using covergrid::test::slurp;
using covergrid::test::split_csv_line;

namespace {

/// Field `name` of CSV row `row` (1 = first data row).
std::string field(const std::string& csv, std::size_t row, const std::string& name) {
  std::stringstream lines(csv);
  std::string header, line;
  std::getline(lines, header);
  const auto h = split_csv_line(header);
  const auto col = static_cast<std::size_t>(std::find(h.begin(), h.end(), name) - h.begin());
  REQUIRE(col < h.size());
  for (std::size_t r = 0; r < row; ++r) REQUIRE(std::getline(lines, line));
  const auto f = split_csv_line(line);
  REQUIRE(col < f.size());
  return f[col];
}

}  // namespace

TEST_CASE("demo, rank, audit, plan and report agree with each other", "[cli][first-user][e2e]") {
  ScratchDir dir("first-user-path");
  fs::copy_file(fs::path(COVERGRID_SCENARIO_DIR) / "demo.toml", dir.file("demo.toml"));
  const auto demo = call({"run", dir.file("demo.toml"), "--quiet"});
  REQUIRE(demo.status == 0);
  std::string cube_path;
  for (const auto& e : fs::directory_iterator(dir.path()))
    if (e.path().extension() == ".h5") cube_path = e.path().string();
  REQUIRE(!cube_path.empty());
  const covergrid::output::CubeReader cube(cube_path);
  const std::string n_range = fmt::format("{}:{}", cube.n.front(), cube.n.back());
  const std::string p_range = fmt::format("{}:{}", cube.p.front(), cube.p.back());
  const auto inf = cube.summary("inf_coverage");

  // rank over the whole n range: the same order as the headline.
  const auto rank = call({"rank", cube_path, "--format", "csv", "--bands", n_range});
  REQUIRE(rank.status == 0);

  for (std::size_t l = 0; l < cube.levels.size(); ++l) {
    const double level = cube.levels[l];
    const std::string level_text = fmt::format("{}", level);
    // The headline block of this level, its rows in order.
    const auto at = demo.out.find(fmt::format("nominal {:g}%", 100 * level));
    REQUIRE(at != std::string::npos);
    std::stringstream block(demo.out.substr(demo.out.find('\n', demo.out.find('\n', at) + 1) + 1));
    std::vector<std::pair<std::string, bool>> headline;  // method, marked below nominal
    for (std::string line; std::getline(block, line) && !line.empty();) {
      std::stringstream words(line);
      std::string rank_no, method;
      words >> rank_no >> method;
      headline.emplace_back(method, line.find("below nominal") != std::string::npos);
    }
    REQUIRE(headline.size() == cube.methods.size());
    // rank's rows for this level, in rank order.
    std::vector<std::string> ranked;
    std::stringstream rows(rank.out);
    std::string line;
    std::getline(rows, line);
    while (std::getline(rows, line)) {
      const auto f = split_csv_line(line);
      if (f[2] == level_text) ranked.push_back(f[7]);
    }
    INFO("level " << level);
    REQUIRE(ranked.size() == headline.size());
    for (std::size_t i = 0; i < ranked.size(); ++i) CHECK(ranked[i] == headline[i].first);

    for (const auto& [method, below] : headline) {
      const std::size_t m = static_cast<std::size_t>(
          std::find(cube.methods.begin(), cube.methods.end(), method) - cube.methods.begin());
      REQUIRE(m < cube.methods.size());
      double worst = 1;
      std::int64_t worst_n = 0;
      for (std::size_t i = 0; i < cube.n.size(); ++i)
        if (inf[cube.summary_index(0, 0, l, m, i)] < worst) {
          worst = inf[cube.summary_index(0, 0, l, m, i)];
          worst_n = cube.n[i];
        }
      // audit: the verdict the headline's mark says, at the cube's worst case.
      const auto audit = call({"audit", "--method", method, "--level", level_text, "--n", n_range, "--p",
                               p_range, "--format", "csv"});
      INFO(method);
      CHECK(audit.status == (below ? 3 : 0));
      CHECK(std::stod(field(audit.out, 1, "worst_coverage")) == worst);
      CHECK(std::stoll(field(audit.out, 1, "worst_n")) == worst_n);

      // plan: the first n and the stable n for "infimum >= level - 0.02" are
      // the ones the cube's infima give over its n axis (every integer here).
      const double target = level - 0.02;
      std::int64_t first = 0, from = 0;
      for (std::size_t i = 0; i < cube.n.size(); ++i) {
        const bool ok = covergrid::engine::meets_coverage(inf[cube.summary_index(0, 0, l, m, i)], target);
        if (ok && first == 0) first = cube.n[i];
        if (!ok) from = 0;
        if (ok && from == 0) from = cube.n[i];
      }
      const auto plan = call({"plan", "--method", method, "--level", level_text, "--p", p_range, "--n",
                              n_range, "--min-coverage", fmt::format("{}", target), "--format", "csv"});
      CHECK((plan.status == 0 || plan.status == 5));
      CHECK(field(plan.out, 1, "n") == (first ? std::to_string(first) : std::string()));
      CHECK(field(plan.out, 2, "n") == (from ? std::to_string(from) : std::string()));
      if (first == 0) CHECK(plan.status == 5);
    }
  }

  // report: written from the same cube, naming every method.
  const auto report = call({"report", cube_path, "-o", dir.file("demo.html")});
  REQUIRE(report.status == 0);
  const std::string html = slurp(dir.file("demo.html"));
  for (const auto& m : cube.methods) CHECK(html.find(m) != std::string::npos);
}
