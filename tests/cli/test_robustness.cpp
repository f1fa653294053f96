// Robustness at the command line: inputs found by fault probes that once
// crashed, wrapped, hung or wrote where they should not. Each case is the
// reproduced input and the one-line refusal (exit 2) or the right answer.
#include "cli_call.hpp"
#include "e2e.hpp"
#include "support.hpp"

#include "covergrid/output/hdf5.hpp"

#include <catch2/catch.hpp>
#include <fmt/format.h>

#include <csignal>
#include <cstdint>
#include <functional>
#include <type_traits>
#include <filesystem>
#include <fstream>
#include <string>
#include <vector>

using covergrid::test::call;

TEST_CASE("audit --n with a step near INT64_MAX judges the one n in range", "[cli][robustness]") {
  // Was signed overflow; the Release build wrapped to n = 30..0 and printed
  // "refuted at n = 1". The range 30..120 with that step holds only 30.
  const auto huge = call({"audit", "--method", "wilson", "--level", "0.95", "--n",
                          "30:120:9223372036854775807", "--p", "0.1:0.9", "--format", "csv"});
  const auto one = call(
      {"audit", "--method", "wilson", "--level", "0.95", "--n", "30", "--p", "0.1:0.9", "--format", "csv"});
  INFO(huge.err);
  CHECK(huge.status == one.status);
  CHECK(huge.out == one.out);
  const auto too_big = call({"audit", "--method", "wilson", "--level", "0.95", "--n",
                             "30:120:99999999999999999999", "--p", "0.1:0.9"});
  CHECK(too_big.status == 2);
  CHECK(too_big.err.find("--n") != std::string::npos);
}

TEST_CASE("a failed write on standard output is exit 1 naming the reason", "[cli][robustness]") {
  // Was exit 0 with the output lost. /dev/full refuses every write with
  // ENOSPC (Linux, common practice).
  covergrid::test::ScratchDir dir("stdout-full");
  for (const std::string args : {"intervals 3 10 --csv", "methods", "intervals 7 30"}) {
    const std::string script = fmt::format("'{}' {} >/dev/full 2>err.txt", COVERGRID_EXE, args);
    const int status =
        covergrid::test::wait_status(covergrid::test::spawn(dir.path(), {"-c", script}, "/bin/sh"));
    const std::string err = covergrid::test::slurp(dir.path() / "err.txt");
    INFO(args << ": " << err);
    CHECK(status == 1);
    CHECK(err == "covergrid: cannot write standard output: No space left on device\n");
  }
}

TEST_CASE("messages escape Unicode line breaks and cap what they echo", "[cli][robustness]") {
  // U+0085, U+2028 and U+2029 break lines for Unicode-aware readers.
  const auto r = call({"intervals", "3", "10", "--method", "wil\xc2\x85so\xe2\x80\xa8n\xe2\x80\xa9"});
  CHECK(r.status == 2);
  CHECK(r.err.find("wil\\u0085so\\u2028n\\u2029") != std::string::npos);
  CHECK(r.err.find("\xe2\x80\xa8") == std::string::npos);
  CHECK(r.err.find('\n') == r.err.size() - 1);
  // A 90 kB value is echoed in part: the message keeps its start and end.
  const auto long_value = call({"intervals", "3", "10", "--method", std::string(90000, 'w')});
  CHECK(long_value.status == 2);
  CHECK(long_value.err.size() < 700);
  CHECK(long_value.err.find("bytes left out") != std::string::npos);
  CHECK(long_value.err.find('\n') == long_value.err.size() - 1);
}

TEST_CASE("command-line parse errors and an unknown command are one line", "[cli][robustness]") {
  for (const std::vector<std::string>& args : {std::vector<std::string>{"frobnicate"},
                                               {"intervals", "3"},
                                               {"intervals", "3", "10", "--no-such-option"},
                                               {"run", "--threads"}}) {
    const auto r = call(args);
    INFO(args[0] << ": " << r.err);
    CHECK(r.status == 2);
    CHECK(r.err.rfind("covergrid: ", 0) == 0);
    CHECK(r.err.find('\n') == r.err.size() - 1);
    CHECK(r.err.find("see covergrid --help") != std::string::npos);
  }
}

TEST_CASE("SIGINT or SIGTERM while the cube is assembled stops with exit 1 and the run resumes",
          "[cli][robustness][e2e]") {
  // Was swallowed: exit 0 after the assembly, no message. A run writes its
  // chunks into the cube as they are computed; the assembly that a signal
  // can meet is a resumed run's, of the chunks only its journal holds. The
  // journal is made whole first, by a run whose cube cannot reach its full
  // size (a file-size limit one byte short of it: the cube is dropped, the
  // journal, a little smaller, completes). An invented grid whose cube
  // (~70 MB of metrics) then takes a good part of a second to assemble from
  // the journal in the Release build (measured 2026-12-03), far more than
  // the 5 ms the test takes to see the .partial file and send the signal.
  const char* text = R"(
title = "interrupted assembly"
[grid]
n = { from = 1, to = 200 }
p = { from = 0.0005, to = 0.9995, count = 2048 }
levels = [0.95]
sides = ["two-sided"]
[[method]]
id = "wilson"
[[method]]
id = "wald"
[[method]]
id = "agresti-coull"
[output]
cube = "a.h5"
tables = ""
)";
  covergrid::test::ScratchDir single("assembly-single");
  std::ofstream(single.path() / "a.toml") << text;
  REQUIRE(covergrid::test::run(single.path(), {"run", "a.toml", "--quiet"}) == 0);
  for (const int sig : {SIGINT, SIGTERM}) {
    covergrid::test::ScratchDir dir("assembly-signal");
    std::ofstream(dir.path() / "a.toml") << text;
    const auto limit_kib = (std::filesystem::file_size(single.path() / "a.h5") - 1) / 1024;
    const std::string script = fmt::format("trap '' XFSZ; ulimit -f {}; exec '{}' run a.toml --quiet",
                                           limit_kib * 2, COVERGRID_EXE);  // dash: 512 B
    REQUIRE(covergrid::test::wait_status(covergrid::test::spawn(dir.path(), {"-c", script}, "/bin/sh")) == 2);
    REQUIRE(covergrid::test::slurp(dir.path() / "stderr.txt").find("200 of 200 chunks are saved") !=
            std::string::npos);
    const pid_t pid = covergrid::test::spawn(dir.path(), {"run", "a.toml", "--quiet"});
    covergrid::test::wait_for_bytes(dir.path() / "a.h5.partial", 0);  // the assembly has begun
    kill(pid, sig);
    const int status = covergrid::test::wait_status(pid);
    const std::string err = covergrid::test::slurp(dir.path() / "stderr.txt");
    INFO("signal " << sig << ": " << err);
    REQUIRE(status == 1);
    CHECK(err.find("stopped while the cube was being assembled; all 200 chunks are saved in a.h5.journal") !=
          std::string::npos);
    CHECK(err.find("run the same command to resume") != std::string::npos);
    CHECK_FALSE(std::filesystem::exists(dir.path() / "a.h5.partial"));
    CHECK_FALSE(std::filesystem::exists(dir.path() / "a.h5"));
    REQUIRE(covergrid::test::run(dir.path(), {"run", "a.toml", "--quiet"}) == 0);
    covergrid::test::same_datasets(single.file("a.h5"), dir.file("a.h5"));
  }
}

TEST_CASE("merge validates every shard's values before it writes anything", "[cli][robustness][merge]") {
  // Was: a coverage of 2.0 merged with exit 0; a bad replicate count wrote
  // the merged cube under its final name, then exit 2.
  namespace o = covergrid::output;
  const char* text = R"(
title = "shard values"
seed = 77
[grid]
n = [3, 4]
p = { from = 0.1, to = 0.9, count = 1025 }
levels = [0.95]
sides = ["two-sided"]
[evaluate]
replicates = 20
[[method]]
id = "wilson"
[output]
cube = "v.h5"
tables = ""
)";
  auto poke = [](const std::string& path, const std::string& name, auto value) {
    o::File f = o::File::open(path, true);
    o::Handle d = o::open_dataset(f.id(), name);
    std::vector<hsize_t> start(o::shape(d.get()).size(), 0), count(start.size(), 1);
    if constexpr (std::is_same_v<decltype(value), double>)
      o::write_block(d.get(), start, count, &value);
    else
      o::write_block_i64(d.get(), start, count, &value);
  };
  struct Damage {
    std::string dataset;
    std::function<void(const std::string&)> apply;
  };
  const std::vector<Damage> damages = {
      {"/exact/coverage", [&](const std::string& p) { poke(p, "/exact/coverage", 2.0); }},
      {"/mc/replicates", [&](const std::string& p) { poke(p, "/mc/replicates", std::int64_t{-5}); }},
  };
  for (const auto& damage : damages) {
    covergrid::test::ScratchDir dir("merge-values");
    std::ofstream(dir.path() / "v.toml") << text;
    REQUIRE(covergrid::test::run(dir.path(), {"run", "v.toml", "--quiet", "--shard", "1/2"}) == 0);
    REQUIRE(covergrid::test::run(dir.path(), {"run", "v.toml", "--quiet", "--shard", "2/2"}) == 0);
    const std::string s1 = dir.file("v.shard-1-of-2.h5"), s2 = dir.file("v.shard-2-of-2.h5");
    damage.apply(s1);
    const auto r = call({"merge", s1, s2, "-o", dir.file("m.h5")});
    INFO(damage.dataset << ": " << r.err);
    CHECK(r.status == 2);
    CHECK(r.err.find(s1 + ": ") != std::string::npos);
    CHECK(r.err.find(damage.dataset) != std::string::npos);
    CHECK(r.err.find('\n') == r.err.size() - 1);
    CHECK_FALSE(std::filesystem::exists(dir.path() / "m.h5"));
    CHECK_FALSE(std::filesystem::exists(dir.path() / "m.h5.partial"));
  }
}

TEST_CASE("audit --replicates has the claims file's upper limit", "[cli][robustness]") {
  const auto r = call({"audit", "--method", "wilson", "--level", "0.95", "--n", "30", "--p", "0.5",
                       "--replicates", "10000000001"});
  CHECK(r.status == 2);
  CHECK(r.err.find("--replicates") != std::string::npos);
  CHECK(r.err.find("above the largest supported count per cell (10000000000)") != std::string::npos);
}

TEST_CASE("grids beyond the documented limits are refused before anything is planned", "[cli][robustness]") {
  // Was: 10^11 cells planned for 43 s in 3.2 GB; 10^12 ended in
  // "internal error: std::bad_alloc".
  covergrid::test::ScratchDir dir("grid-limits");
  std::ofstream(dir.path() / "big.toml") << "[grid]\nn = { from = 1, to = 1000000 }\n"
                                            "p = { from = 0.0001, to = 0.9999, count = 1000000 }\n"
                                            "levels = [0.95]\n[[method]]\nid = \"wilson\"\n";
  for (const std::string mode : {"--dry-run", "--quiet"}) {
    const auto r = call({"run", dir.file("big.toml"), mode});
    CHECK(r.status == 2);
    CHECK(r.err.find("big.toml:3: [grid] n (1000000 values) times p (1000000 values) is 1e+12 cells; a "
                     "scenario may have at most 1e+09") != std::string::npos);
  }
  std::string levels;
  for (int i = 0; i < 300; ++i) levels += fmt::format("{}0.{:03d}", i ? ", " : "", 500 + i);
  std::ofstream(dir.path() / "combos.toml")
      << "[grid]\nn = 5\np = 0.5\nlevels = [" << levels << "]\nsides = [\"two-sided\", \"lower-bound\"]\n"
      << "[[method]]\nid = \"wilson\"\n[[method]]\nid = \"wald\"\n[[method]]\nid = \"jeffreys\"\n"
      << "[[method]]\nid = \"logit\"\n[[method]]\nid = \"arcsine\"\n[[method]]\nid = \"mid-p\"\n"
      << "[[method]]\nid = \"wald-cc\"\n";
  const auto c = call({"run", dir.file("combos.toml"), "--dry-run"});
  CHECK(c.status == 2);
  CHECK(
      c.err.find("combos.toml:4: [grid] levels (300) times sides (2) times the 7 [[method]] entries are 4200 "
                 "combinations; a scenario may have at most 4096") != std::string::npos);
}

TEST_CASE("the start-of-run estimate of 10^10 replicates per cell is made from bounded probes",
          "[cli][robustness][estimate]") {
  // Was: --dry-run computed a whole chunk at 10^10 replicates (minutes). The
  // probes (one n row, at most 64 replicates) give an estimate at once; the
  // suite's time limit would catch a return of the old behaviour.
  covergrid::test::ScratchDir dir("estimate-bound");
  std::ofstream(dir.path() / "r.toml")
      << "[grid]\nn = [20, 40]\np = [0.2, 0.5]\nlevels = [0.95]\n"
         "[evaluate]\nreplicates = 10000000000\n[[method]]\nid = \"wilson\"\n";
  const auto r = call({"run", dir.file("r.toml"), "--dry-run"});
  INFO(r.err);
  CHECK(r.status == 0);
  CHECK(r.out.find("4 cells to compute") != std::string::npos);
  // 4·10^10 draws: minutes at least, at any sampler speed this machine has
  // (a few 10^8 draws per second per thread, scripts/bench).
  CHECK(r.out.find("estimate: 4 cells to compute, about ") != std::string::npos);
  CHECK(r.out.find("under a second") == std::string::npos);
}

TEST_CASE("audit and plan estimate their work up front and ask for --yes above two hours",
          "[cli][robustness][estimate]") {
  // Was: one bayes-hpd claim over n = 3..100000 ran for over ten minutes
  // without a word (it needs hours). The probes take about half a second;
  // the suite's time limit would catch an audit that started the work.
  const auto r = call({"audit", "--method", "bayes-hpd", "--side", "lower-bound", "--level", "0.95", "--n",
                       "3:100000", "--p", "0.01:0.99"});
  INFO(r.err);
  CHECK(r.status == 2);
  CHECK(r.out.empty());
  CHECK(r.err.find("covergrid: --yes: this audit is large: about ") != std::string::npos);
  CHECK(r.err.find("the limit without --yes: about 2.0 h of wall time); narrow the claims' n ranges") !=
        std::string::npos);
  CHECK(r.err.find('\n') == r.err.size() - 1);
  // A claims file is estimated the same way.
  covergrid::test::ScratchDir dir("audit-estimate");
  std::ofstream(dir.path() / "c.toml") << "[[claim]]\nmethod = \"blaker\"\nlevel = 0.95\n"
                                          "n = { from = 10, to = 200000 }\np = { from = 0.01, to = 0.99 }\n";
  const auto f = call({"audit", "--claims", dir.file("c.toml")});
  INFO(f.err);
  CHECK(f.status == 2);
  CHECK(f.err.find("this audit is large") != std::string::npos);
  // The plan's estimate is an upper bound: every n of the range decided.
  const auto p = call({"plan", "--method", "blaker", "--level", "0.95", "--min-coverage", "0.95", "--p",
                       "0.01:0.99", "--n", "1:1000000"});
  INFO(p.err);
  CHECK(p.status == 2);
  CHECK(p.out.empty());
  CHECK(p.err.find("covergrid: --yes: this plan is large: about ") != std::string::npos);
  CHECK(p.err.find("narrow the --n search range, or run again with --yes") != std::string::npos);
  // A small audit is not held up, and says nothing of its estimate off a
  // terminal when it is short.
  const auto s = call({"audit", "--method", "wilson", "--level", "0.95", "--n", "10:40", "--p", "0.1:0.9"});
  CHECK(s.status == 3);
  CHECK(s.err.empty());
}
