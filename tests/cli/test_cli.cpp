// The command line, through the library (run_cli) and the built executable:
// every command's output and exit status, and bad input giving exit 2 with a
// message naming file, line and key or the option, and no output written.
#include "support.hpp"

#include "cli_call.hpp"
#include "covergrid/cli/cli.hpp"

#include <catch2/catch.hpp>
#include <fmt/format.h>
#include <sys/wait.h>

#include <algorithm>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <set>
#include <sstream>

namespace fs = std::filesystem;
using covergrid::test::call;
using covergrid::test::ScratchDir;
using covergrid::test::slurp;

namespace {

/// Runs the built executable in `dir` with `args`; stdin closed; killed
/// after 240 s (coreutils timeout), so that no case can hang the suite.
covergrid::test::CliResult exe(const fs::path& dir, const std::string& args) {
  const std::string cmd = fmt::format("cd '{}' && timeout -s KILL 240 '{}' {} >cli.out 2>cli.err </dev/null",
                                      dir.string(), COVERGRID_EXE, args);
  const int raw = std::system(cmd.c_str());
  covergrid::test::CliResult r{WIFEXITED(raw) ? WEXITSTATUS(raw) : -1, slurp(dir / "cli.out"),
                               slurp(dir / "cli.err")};
  fs::remove(dir / "cli.out");
  fs::remove(dir / "cli.err");
  return r;
}

std::set<std::string> listing(const fs::path& dir) {
  std::set<std::string> out;
  for (const auto& e : fs::directory_iterator(dir)) out.insert(e.path().filename().string());
  return out;
}

}  // namespace

TEST_CASE("methods lists the catalog", "[cli]") {
  const auto r = call({"methods"});
  CHECK(r.status == 0);
  for (const char* id : {"wald", "wilson-cc", "clopper-pearson", "bayes-hpd", "blaker"})
    CHECK(r.out.find(id) != std::string::npos);
  CHECK(r.out.find("parameter boundary = true") != std::string::npos);
}

TEST_CASE("intervals prints every method's limits", "[cli]") {
  const auto r = call({"intervals", "3", "20"});
  CHECK(r.status == 0);
  CHECK(r.out.find("clopper-pearson") != std::string::npos);
  CHECK(r.out.find("0.032071") !=
        std::string::npos);  // CP lower, 3/20 at 95 %: Beta^-1(0.025; 3, 18) (reference table row)
  const auto csv = call({"intervals", "0", "12", "--csv", "--method", "wald", "--method",
                         "jeffreys:boundary=false", "--level", "0.9"});
  CHECK(csv.status == 0);
  CHECK(csv.out.rfind("method,x,n,level,side,lower,upper,raw_lower,raw_upper\n", 0) == 0);
  CHECK(csv.out.find("\"jeffreys(boundary=false)\",0,12,0.9,two-sided,") != std::string::npos);
  const auto one =
      call({"intervals", "5", "50", "--side", "upper-bound", "--method", "blaker", "--method", "wilson"});
  CHECK(one.status == 0);
  CHECK(one.out.find("blaker  defines only the two-sided interval") != std::string::npos);
}

TEST_CASE("bad command-line values give exit 2 and name the option", "[cli][bad-input]") {
  struct Case {
    std::vector<std::string> args;
    const char* text;
  } cases[] = {
      {{"intervals", "21", "20"}, "X = 21 must lie in 0..N"},
      {{"intervals", "3", "0"}, "N = 0 must be at least 1"},
      {{"intervals", "3", "20", "--level", "1.5"}, "--level: 1.5 is outside [1e-06, 0.999999999999]"},
      {{"intervals", "3", "20", "--side", "left"}, "--side: \"left\" is not one of"},
      {{"intervals", "3", "20", "--method", "walds"}, "unknown method id 'walds'"},
      {{"intervals", "3", "20", "--method", "jeffreys:edge=1"}, "takes no parameter 'edge'"},
      {{"intervals", "3"}, "N is required"},
      {{"intervals", "three", "20"}, "X"},
      {{"run", "--threads", "0"}, "--threads"},
      {{"frobnicate"}, "frobnicate"},
      {{"inspect"}, "CUBE is required"},
      {{}, "A subcommand is required"},
  };
  for (const auto& c : cases) {
    const auto r = call(c.args);
    INFO("args: " << fmt::format("{}", fmt::join(c.args, " ")) << "\nerr: " << r.err);
    CHECK(r.status == 2);
    CHECK(r.err.find(c.text) != std::string::npos);
  }
  CHECK(call({"--help"}).status == 0);
  CHECK(call({"run", "--help"}).out.find("--overwrite") != std::string::npos);
  CHECK(call({"--version"}).status == 0);
}

TEST_CASE("the executable rejects every malformed scenario without writing", "[cli][bad-input][e2e]") {
  const fs::path bad = fs::path(COVERGRID_TEST_DIR) / "scenarios" / "bad";
  std::size_t count = 0;
  for (const auto& entry : fs::directory_iterator(bad)) {
    if (entry.path().extension() != ".toml") continue;
    ScratchDir dir("bad-" + entry.path().stem().string());
    fs::copy_file(entry.path(), dir.path() / entry.path().filename());
    std::string first;
    {
      std::ifstream in(entry.path());
      std::getline(in, first);
    }
    const auto bar = first.find(" | ");
    const int line = std::stoi(first.substr(10, bar - 10));
    const auto before = listing(dir.path());
    const auto r = exe(dir.path(), "run --quiet " + entry.path().filename().string());
    INFO(entry.path().filename().string() << ": " << r.err);
    CHECK(r.status == 2);
    if (line > 0)
      CHECK(r.err.find(fmt::format("{}:{}: ", entry.path().filename().string(), line)) != std::string::npos);
    CHECK(r.err.find(first.substr(bar + 3)) != std::string::npos);
    CHECK(r.out.empty());
    CHECK(listing(dir.path()) == before);
    ++count;
  }
  CHECK(count >= 15);
}

TEST_CASE("run with no scenario runs the demo and a rerun finds it complete", "[cli][e2e]") {
  ScratchDir dir("demo");
  const auto r = exe(dir.path(), "run");
  INFO(r.err);
  REQUIRE(r.status == 0);
  // Not a terminal: plain progress lines (at least the closing one), no redraws.
  CHECK(r.err.find("running the bundled demo") != std::string::npos);
  CHECK(r.err.find("progress: ") != std::string::npos);
  CHECK(r.err.find("cells/s") != std::string::npos);
  CHECK(r.err.find('\r') == std::string::npos);
  CHECK(r.out.find("nominal 95%") != std::string::npos);
  CHECK(r.out.find("clopper-pearson") != std::string::npos);
  CHECK(r.out.find("long-run property") != std::string::npos);
  const auto files = listing(dir.path());
  CHECK(files.count("solder-joints-demo.h5") == 1);
  CHECK(files.count("solder-joints-demo-summary.csv") == 1);
  CHECK(files.count("solder-joints-demo-summary.md") == 1);
  CHECK(files.count("solder-joints-demo.h5.partial") == 0);

  const auto again = exe(dir.path(), "run");
  CHECK(again.status == 0);
  CHECK(again.err.find("already complete") != std::string::npos);

  const auto inspect = exe(dir.path(), "inspect solder-joints-demo.h5");
  CHECK(inspect.status == 0);
  CHECK(inspect.out.find("complete: yes") != std::string::npos);
  CHECK(inspect.out.find("method 8") != std::string::npos);

  std::ofstream(dir.path() / "junk.h5") << "junk";
  const auto junk = exe(dir.path(), "inspect junk.h5");
  CHECK(junk.status == 2);
  CHECK(junk.err.find("junk.h5: is not an HDF5 file") != std::string::npos);
}

TEST_CASE("inspect --pair prints paired differences of a Monte Carlo cube", "[cli][mc]") {
  ScratchDir dir("pair");
  std::ofstream(dir.path() / "m.toml") << R"(
seed = 8
[grid]
n = [10, 30]
p = [0.1, 0.4]
levels = [0.9]
[evaluate]
replicates = 2000
[[method]]
id = "wald"
[[method]]
id = "jeffreys"
)";
  REQUIRE(exe(dir.path(), "run --quiet m.toml").status == 0);
  const auto r = exe(dir.path(), "inspect m.h5 --pair wald,jeffreys");
  INFO(r.err);
  CHECK(r.status == 0);
  CHECK(r.out.find("coverage of wald minus jeffreys (paired, same draws)") != std::string::npos);
  const auto csv = exe(dir.path(), "inspect m.h5 --pair wald,jeffreys --csv");
  CHECK(csv.status == 0);
  CHECK(std::count(csv.out.begin(), csv.out.end(), '\n') == 1 + 2 * 2);
  const auto bad = exe(dir.path(), "inspect m.h5 --pair wald,nope");
  CHECK(bad.status == 2);
  CHECK(bad.err.find("no method labelled 'nope'") != std::string::npos);
}
