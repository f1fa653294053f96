// Extreme numerical inputs at the command line (issue 11, item 12): each
// input that once aborted with exit 1 is either computed or refused up front
// with exit 2 naming the option or file:line, as README "Numerical limits"
// documents.
#include "cli_call.hpp"
#include "support.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

using covergrid::test::call;
using covergrid::test::ScratchDir;
using covergrid::test::split_csv_line;

namespace {

/// The (lower, upper) of the one CSV row of `intervals ... --csv`.
std::pair<double, double> csv_limits(const std::string& out) {
  std::istringstream in(out);
  std::string header, row;
  std::getline(in, header);
  std::getline(in, row);
  const auto f = split_csv_line(row);
  REQUIRE(f.size() == 9);
  return {std::stod(f[5]), std::stod(f[6])};
}

}  // namespace

TEST_CASE("bayes-hpd at x = 999999, n = 10^6, level 1 - 1e-9 is computed", "[cli][extreme]") {
  const auto r =
      call({"intervals", "999999", "1000000", "--level", "0.999999999", "--method", "bayes-hpd", "--csv"});
  INFO(r.err);
  REQUIRE(r.status == 0);
  const auto [lo, hi] = csv_limits(r.out);
  // Posterior Beta(10^6, 2), CDF x^s (s + 1 - s x): the HPD limits solved
  // with it by bisection at 60 digits in mpmath 1.2.1 (Debian 12) are
  // L = 0.99997606057065648906, U = 0.99999999999999904007; the contract
  // is 1e-12 in p (the upper tail's mass, ~1e-16, is below the solver's
  // 1e-15 absolute tolerance in u, so U is the looser one: 3e-14 here).
  CHECK(lo == Approx(0.99997606057065648906).margin(1e-12));
  CHECK(hi == Approx(0.99999999999999904007).margin(1e-12));
  CHECK(hi <= 1.0);
}

TEST_CASE("bayes-hpd priors outside [1e-3, 1e6] are refused naming the parameter", "[cli][extreme]") {
  for (const std::string a : {"1e16", "1e17", "2e6"}) {
    const auto r = call({"intervals", "3", "20", "--method", "bayes-hpd:a=" + a});
    INFO(a << ": " << r.err);
    CHECK(r.status == 2);
    CHECK(r.err.find("parameter 'a' of method 'bayes-hpd'") != std::string::npos);
    CHECK(r.out.empty());
  }
  const auto edge = call({"intervals", "3", "20", "--method", "bayes-hpd:a=1e6,b=1e-3", "--csv"});
  INFO(edge.err);
  CHECK(edge.status == 0);
}

TEST_CASE("levels outside [1e-6, 1 - 1e-12] are refused naming --level", "[cli][extreme]") {
  for (const std::string level : {"5e-324", "1e-7", "0.9999999999999"}) {
    const auto r = call({"intervals", "3", "20", "--level", level, "--side", "lower-bound"});
    INFO(level << ": " << r.err);
    CHECK(r.status == 2);
    CHECK(r.err.find("--level: ") != std::string::npos);
    CHECK(r.err.find("is outside [1e-06, 0.999999999999]") != std::string::npos);
  }
  // The ends themselves are computed, by every method on every side it has.
  for (const std::string level : {"1e-6", "0.999999999999"})
    for (const std::string side : {"two-sided", "lower-bound", "upper-bound"}) {
      const auto r = call({"intervals", "3", "20", "--level", level, "--side", side, "--csv"});
      INFO(level << " " << side << ": " << r.err);
      CHECK(r.status == 0);
    }
}

TEST_CASE("a scenario level outside the limits is refused with file:line", "[cli][extreme]") {
  ScratchDir dir("extreme-level");
  const std::string path = dir.file("tiny-level.toml");
  std::ofstream(path) << "[grid]\nn = 5\np = 0.5\nlevels = [0.95,\n  5e-324]\n[[method]]\nid = \"wilson\"\n";
  const auto r = call({"run", path});
  INFO(r.err);
  CHECK(r.status == 2);
  CHECK(r.err.find("tiny-level.toml:5: [grid] levels value 5e-324 is outside [1e-06, 0.999999999999]") !=
        std::string::npos);
}

TEST_CASE("a scenario with p = 4.9e-324 or 1e-307 runs for every method and writes no nan",
          "[cli][extreme]") {
  // p = 1e-307 aborted the run: Boost's ibeta_derivative overflowed near the
  // smallest normal double ("numeric overflow", exit 1).
  ScratchDir dir("subnormal-p");
  const std::string path = dir.file("tiny-p.toml");
  std::ofstream(path)
      << "[grid]\nn = [1, 30, 1000]\np = [4.9e-324, 2.3e-308, 1e-307, 1e-300, 1e-201, 0.25]\n"
         "levels = [0.5, 0.95, 0.999]\n"
         "sides = [\"two-sided\", \"upper-bound\", \"lower-bound\"]\n[evaluate]\nreplicates = 20\n"
         "[[method]]\nid = \"wald\"\n[[method]]\nid = \"wilson\"\n[[method]]\nid = \"clopper-pearson\"\n"
         "[[method]]\nid = \"mid-p\"\n[[method]]\nid = \"bayes-hpd\"\n[[method]]\nid = \"blaker\"\n"
         "[[method]]\nid = \"logit\"\n[[method]]\nid = \"likelihood-ratio\"\n"
         "[[method]]\nid = \"jeffreys\"\n[[method]]\nid = \"arcsine\"\n[[method]]\nid = \"agresti-coull\"\n"
         "[output]\ncube = \"tiny-p.h5\"\ntables = \"tiny-p\"\n";
  const auto r = call({"run", path});
  INFO(r.err);
  REQUIRE(r.status == 0);
  // The per-cell CSV is not written; the summary's grid minimum over p
  // includes both tiny p, so a finite row per method shows they computed.
  const std::string summary = covergrid::test::slurp(dir.file("tiny-p-summary.csv"));
  CHECK(summary.find("nan") == std::string::npos);
  CHECK(summary.find("wald") != std::string::npos);
}

TEST_CASE("a bad-input message stays on one line and says each word once", "[cli][bad-input]") {
  covergrid::test::ScratchDir dir("one-line");
  // A newline inside a scenario string is refused, on one line.
  std::ofstream(dir.file("nl.toml"))
      << "[grid]\nn = 5\np = 0.5\nlevels = [0.95]\n[[method]]\nid = \"wil\\nson\\tx\"\n";
  const auto r = covergrid::test::call({"run", dir.file("nl.toml"), "--quiet"});
  CHECK(r.status == 2);
  CHECK(r.err.find("nl.toml:6: [[method]] id holds a control character (code 10)") != std::string::npos);
  CHECK(r.err.find('\n') == r.err.size() - 1);
  // A newline and a tab in an option value are escaped in the message.
  const auto o = covergrid::test::call({"intervals", "3", "10", "--method", "wil\nson\tx"});
  CHECK(o.status == 2);
  CHECK(o.err.find("wil\\nson\\tx") != std::string::npos);
  CHECK(o.err.find('\n') == o.err.size() - 1);
  // A claims file's parameter error: "method" once, not "method method".
  std::ofstream(dir.file("c.toml"))
      << "[[claim]]\nmethod = { id = \"jeffreys\", edge = 1 }\nlevel = 0.95\nn = 10\np = 0.5\n";
  const auto c = covergrid::test::call({"audit", "--claims", dir.file("c.toml")});
  CHECK(c.status == 2);
  CHECK(c.err.find("method method") == std::string::npos);
  CHECK(c.err.find("c.toml:2: [[claim]] method 'jeffreys' takes no parameter 'edge'") != std::string::npos);
}
