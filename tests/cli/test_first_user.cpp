// What a first user meets: the commands agree with each other on what
// "meets nominal" means and which method comes first, inconclusive
// simulations say that exact sums decide, and the help and tables read
// cleanly. Each case failed before its fix.
#include "support.hpp"

#include "cli_call.hpp"
#include "covergrid/engine/coverage_rule.hpp"
#include "covergrid/output/cube.hpp"

#include <catch2/catch.hpp>
#include <fmt/format.h>

#include <algorithm>
#include <filesystem>
#include <fstream>
#include <sstream>

namespace fs = std::filesystem;
using covergrid::test::call;
using covergrid::test::ScratchDir;
using covergrid::test::slurp;

namespace {

std::vector<std::vector<std::string>> csv_rows(const std::string& text) {
  std::vector<std::vector<std::string>> rows;
  std::stringstream lines(text);
  for (std::string line; std::getline(lines, line);) rows.push_back(covergrid::test::split_csv_line(line));
  return rows;
}

std::size_t column(const std::vector<std::string>& header, const std::string& name) {
  const auto it = std::find(header.begin(), header.end(), name);
  REQUIRE(it != header.end());
  return static_cast<std::size_t>(it - header.begin());
}

/// The method named on the first ranked row after the headline's header
/// line for `level_text` (e.g. "nominal 90%").
std::string headline_first(const std::string& headline, const std::string& level_text) {
  const auto at = headline.find(level_text);
  REQUIRE(at != std::string::npos);
  const auto header = headline.find('\n', at);
  const auto row = headline.find('\n', header + 1);
  std::stringstream first(headline.substr(row + 1, headline.find('\n', row + 1) - row - 1));
  std::string rank, method;
  first >> rank >> method;
  CHECK(rank == "1");
  return method;
}

const char* blaker_scenario = R"(title = "Blaker at its nominal level"
[grid]
n = { from = 5, to = 50 }
p = { from = 0.01, to = 0.99, count = 197 }
levels = [0.90, 0.95]
[[method]]
id = "blaker"
[[method]]
id = "clopper-pearson"
[[method]]
id = "wilson"
[output]
cube = "blaker.h5"
tables = "blaker"
)";

}  // namespace

TEST_CASE("rank, audit, the headline and the tables judge nominal by one rule", "[cli][first-user]") {
  ScratchDir dir("blaker-rule");
  std::ofstream(dir.file("blaker.toml")) << blaker_scenario;
  const auto run = call({"run", dir.file("blaker.toml"), "--quiet"});
  REQUIRE(run.status == 0);

  // The case is live: Blaker's worst exact infimum at 90 % is nominal up to
  // rounding (Blaker 2000: the interval never covers below nominal), and in
  // floating point it lands a few 1e-16 below 0.9 on this grid.
  covergrid::output::CubeReader cube(dir.file("blaker.h5"));
  const auto inf = cube.summary("inf_coverage");
  double worst = 1;
  for (std::size_t i = 0; i < cube.n.size(); ++i)
    worst = std::min(worst, inf[cube.summary_index(0, 0, 0, 0, i)]);
  CHECK(worst < 0.9);
  CHECK(worst > 0.9 - covergrid::engine::coverage_decision_slack);

  // rank: Blaker meets nominal and, being shorter than Clopper-Pearson, is first.
  const auto rank = call({"rank", dir.file("blaker.h5"), "--format", "csv", "--bands", "5:50"});
  REQUIRE(rank.status == 0);
  const auto rows = csv_rows(rank.out);
  const auto& h = rows.front();
  bool seen = false;
  for (std::size_t r = 1; r < rows.size(); ++r) {
    if (rows[r].size() < h.size() || rows[r][column(h, "level")] != "0.9") continue;
    if (rows[r][column(h, "method")] == "blaker") {
      seen = true;
      CHECK(rows[r][column(h, "eligible")] == "1");
      CHECK(rows[r][column(h, "rank")] == "1");
    }
  }
  CHECK(seen);
  const auto text = call({"rank", dir.file("blaker.h5")});
  CHECK(text.out.find("nominal - 0") == std::string::npos);
  CHECK(text.out.find("[below nominal]") != std::string::npos);  // wilson is below
  const auto gated = call({"rank", dir.file("blaker.h5"), "--tolerance", "0.01"});
  CHECK(gated.out.find("nominal - 0.01") != std::string::npos);

  // audit: the same claim holds.
  const auto audit =
      call({"audit", "--method", "blaker", "--level", "0.9", "--n", "5:50", "--p", "0.01:0.99"});
  CHECK(audit.status == 0);

  // The headline and the Markdown table: Blaker first at 90 %, not marked.
  CHECK(headline_first(run.out, "nominal 90%") == "blaker");
  const auto blaker_line = run.out.substr(run.out.find("   1  blaker"), 80);
  CHECK(blaker_line.substr(0, blaker_line.find('\n')).find("below nominal") == std::string::npos);
  const std::string md = slurp(dir.file("blaker-summary.md"));
  CHECK(md.find("| 1 | blaker |") != std::string::npos);
}

TEST_CASE("the headline's first method is rank's first method over the whole n range", "[cli][first-user]") {
  ScratchDir dir("same-first");
  fs::copy_file(fs::path(COVERGRID_SCENARIO_DIR) / "demo.toml", dir.file("demo.toml"));
  const auto demo = call({"run", dir.file("demo.toml"), "--quiet"});
  REQUIRE(demo.status == 0);
  const auto cubes = [&] {
    std::vector<fs::path> v;
    for (const auto& e : fs::directory_iterator(dir.path()))
      if (e.path().extension() == ".h5") v.push_back(e.path());
    return v;
  }();
  REQUIRE(cubes.size() == 1);
  covergrid::output::CubeReader cube(cubes[0].string());
  const std::string band = fmt::format("{}:{}", cube.n.front(), cube.n.back());
  const auto rank = call({"rank", cubes[0].string(), "--format", "csv", "--bands", band});
  REQUIRE(rank.status == 0);
  const auto rows = csv_rows(rank.out);
  const auto& h = rows.front();
  for (double level : cube.levels) {
    std::string first;
    for (std::size_t r = 1; r < rows.size(); ++r)
      if (rows[r].size() >= h.size() && std::stod(rows[r][column(h, "level")]) == level &&
          rows[r][column(h, "rank")] == "1")
        first = rows[r][column(h, "method")];
    INFO(level);
    CHECK(!first.empty());
    CHECK(headline_first(demo.out, fmt::format("nominal {:g}%", 100 * level)) == first);
  }
  // Every column of the headline is explained under it.
  std::string flat = demo.out;
  std::replace(flat.begin(), flat.end(), '\n', ' ');
  for (const char* word :
       {"# = rank", "worst % =", "at n =", "mean % =", "RMS pts =", "below % =", "width ="})
    CHECK(flat.find(word) != std::string::npos);
}

TEST_CASE("an inconclusive simulated audit says that exact sums decide it", "[cli][first-user][audit]") {
  // Wilson at n = 40, p = 0.3, 95 %: a threshold just below the exact
  // coverage is more than 300 replicates can settle.
  const auto exact =
      call({"audit", "--method", "wilson", "--level", "0.95", "--n", "40", "--p", "0.3", "--format", "csv"});
  const auto rows = csv_rows(exact.out);
  const double coverage = std::stod(rows[1][column(rows[0], "worst_coverage")]);
  const std::string tolerance = fmt::format("{:.17g}", 0.95 - coverage + 1e-4);  // threshold 1e-4 below it
  const auto sim = call({"audit", "--method", "wilson", "--level", "0.95", "--n", "40", "--p", "0.3",
                         "--replicates", "300", "--seed", "3", "--tolerance", tolerance});
  REQUIRE(sim.status == 4);
  CHECK(sim.out.find("exact enumeration decides this claim at once: holds") != std::string::npos);
  CHECK(sim.out.find("audit it exactly (without --replicates") != std::string::npos);
  const auto csv = call({"audit", "--method", "wilson", "--level", "0.95", "--n", "40", "--p", "0.3",
                         "--replicates", "300", "--seed", "3", "--tolerance", tolerance, "--format", "csv"});
  const auto crow = csv_rows(csv.out);
  CHECK(crow[1][column(crow[0], "exact_verdict")] == "holds");
  // A decided simulated claim carries no exact verdict.
  const auto decided = call({"audit", "--method", "wald", "--level", "0.95", "--n", "10", "--p", "0.05",
                             "--replicates", "2000", "--format", "csv"});
  REQUIRE(decided.status == 3);
  const auto drow = csv_rows(decided.out);
  CHECK(drow[1][column(drow[0], "exact_verdict")].empty());
}

TEST_CASE("help and tables read cleanly", "[cli][first-user]") {
  const auto run_help = call({"run", "--help"});
  CHECK(run_help.out.find("--threads 1..4096") != std::string::npos);
  CHECK(run_help.out.find("INT:INT") == std::string::npos);
  const auto audit_help = call({"audit", "--help"});
  CHECK(audit_help.out.find("long-run property") != std::string::npos);
  CHECK(audit_help.out.find("qualified statistician") != std::string::npos);
  // The misses line names the side in words.
  const auto audit =
      call({"audit", "--method", "wald", "--level", "0.95", "--n", "10:30", "--p", "0.01:0.99"});
  CHECK(audit.out.find(" tail\n") == std::string::npos);
  CHECK(audit.out.find("both tail") == std::string::npos);
  // The Markdown summary prints every mean width with four decimals.
  ScratchDir dir("md-width");
  fs::copy_file(fs::path(COVERGRID_SCENARIO_DIR) / "demo.toml", dir.file("demo.toml"));
  REQUIRE(call({"run", dir.file("demo.toml"), "--quiet"}).status == 0);
  std::string md;
  for (const auto& e : fs::directory_iterator(dir.path()))
    if (e.path().extension() == ".md") md = slurp(e.path());
  REQUIRE(!md.empty());
  std::stringstream lines(md);
  std::size_t rows = 0;
  for (std::string line; std::getline(lines, line);) {
    if (line.rfind("| ", 0) != 0 || line.find("| # |") == 0) continue;
    std::vector<std::string> cells;
    std::stringstream split(line);
    for (std::string cell; std::getline(split, cell, '|');) cells.push_back(cell);
    if (cells.size() < 9) continue;
    const std::string width = cells[8].substr(1, cells[8].size() - 2);
    INFO(line);
    const auto dot = width.find('.');
    REQUIRE(dot != std::string::npos);
    CHECK(width.size() - dot - 1 == 4);
    ++rows;
  }
  CHECK(rows > 10);
}

TEST_CASE("intervals groups methods by their guarantee and draws each interval",
          "[cli][first-user][intervals]") {
  const auto r = call({"intervals", "2", "10"});
  REQUIRE(r.status == 0);
  const auto guaranteed = r.out.find("Guaranteed: coverage at least 95 %");
  const auto approximate = r.out.find("Approximate: coverage near 95 %");
  const auto bayesian = r.out.find("Bayesian: posterior intervals");
  REQUIRE(guaranteed != std::string::npos);
  REQUIRE(approximate != std::string::npos);
  REQUIRE(bayesian != std::string::npos);
  CHECK(guaranteed < approximate);
  CHECK(approximate < bayesian);
  auto row = [&](const std::string& label) {
    const auto at = r.out.find("\n  " + label + " ");
    REQUIRE(at != std::string::npos);
    return std::make_pair(at, r.out.substr(at + 1, r.out.find('\n', at + 1) - at - 1));
  };
  // Each method in its group: the guaranteed ones between the first two headings.
  for (const char* m : {"clopper-pearson", "blaker"}) {
    const auto [at, text] = row(m);
    CHECK(at > guaranteed);
    CHECK(at < approximate);
  }
  for (const char* m : {"wald", "wilson", "mid-p", "likelihood-ratio", "logit"}) {
    const auto [at, text] = row(m);
    CHECK(at > approximate);
    CHECK(at < bayesian);
  }
  for (const char* m : {"jeffreys", "bayes-hpd"}) CHECK(row(m).first > bayesian);
  // The drawing: 40 columns for [0, 1]; Clopper-Pearson at 2/10 is
  // [0.025211, 0.556095] (Beta quantiles, the reference table's row), so '['
  // at column round(0.025211 * 39) = 1, ']' at round(0.556095 * 39) = 22 and
  // 'o' at round(0.2 * 39) = 8.
  const std::string cp = row("clopper-pearson").second;
  CHECK(cp.find("0.025211  0.556095  0.530885") != std::string::npos);
  const auto frame = cp.find("0 ");
  const std::string d = cp.substr(cp.find(" 0 ") + 3, 40);
  (void)frame;
  CHECK(d == ".[======o=============].................");
  // Wald at 2/10 overshoots below 0, and at 0/10 has zero width.
  CHECK(row("wald").second.find("lower clipped from -0.0479") != std::string::npos);
  const auto zero = call({"intervals", "0", "10", "--method", "wald"});
  CHECK(zero.out.find("zero width") != std::string::npos);
  CHECK(zero.out.find("0 |....") != std::string::npos);
  // The CSV keeps its columns.
  const auto csv = call({"intervals", "2", "10", "--csv", "--method", "wald"});
  CHECK(csv.out.rfind("method,x,n,level,side,lower,upper,raw_lower,raw_upper\n\"wald\",2,10,0.95,two-sided,",
                      0) == 0);
}

TEST_CASE("every CSV number is the shortest text that reads back as the same double",
          "[cli][first-user][csv]") {
  ScratchDir dir("csv-policy");
  std::ofstream(dir.file("c.toml")) << R"([grid]
n = { from = 5, to = 30 }
p = { from = 0.01, to = 0.99, count = 99 }
levels = [0.9, 0.95]
[[method]]
id = "wilson"
[[method]]
id = "clopper-pearson"
[output]
cube = "c.h5"
tables = "c"
)";
  REQUIRE(call({"run", dir.file("c.toml"), "--quiet"}).status == 0);
  std::vector<std::pair<std::string, std::string>> files = {
      {"summary", slurp(dir.file("c-summary.csv"))},
      {"ranking", slurp(dir.file("c-ranking.csv"))},
      {"rank", call({"rank", dir.file("c.h5"), "--format", "csv"}).out},
      {"audit", call({"audit", "--method", "wald", "--level", "0.95", "--n", "5:30", "--p", "0.01:0.99",
                      "--format", "csv"})
                    .out},
      {"intervals", call({"intervals", "7", "30", "--csv"}).out}};
  std::size_t numbers = 0, long_ones = 0;
  for (const auto& [name, text] : files) {
    const auto rows = csv_rows(text);
    REQUIRE(rows.size() > 1);
    for (std::size_t r = 1; r < rows.size(); ++r)
      for (const auto& field : rows[r]) {
        if (field.empty() || field.find_first_not_of("0123456789.-+e") != std::string::npos) continue;
        if (field.find('.') == std::string::npos && field.find('e') == std::string::npos)
          continue;  // integer
        const double v = std::stod(field);
        INFO(name << ": " << field);
        CHECK(fmt::format("{}", v) == field);  // shortest round-trip form (fmt's default)
        ++numbers;
        long_ones += field.size() > 12;
      }
  }
  CHECK(numbers > 1000);
  CHECK(long_ones > 100);  // full precision kept where the value needs it
  // The summary CSV's values are the cube's, bit for bit.
  covergrid::output::CubeReader cube(dir.file("c.h5"));
  const auto inf = cube.summary("inf_coverage");
  const auto rows = csv_rows(slurp(dir.file("c-summary.csv")));
  const std::size_t col = column(rows[0], "inf_coverage");
  // Rows are (model, side, level, method, n) in axis order.
  for (std::size_t r = 1; r < rows.size(); ++r) CHECK(std::stod(rows[r][col]) == inf[r - 1]);
}
