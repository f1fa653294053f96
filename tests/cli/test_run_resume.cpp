// The run command end to end with Monte Carlo: byte-identical datasets for
// 1 and 2 threads; a run killed with SIGKILL mid-way and resumed ends with the
// same cube; SIGINT stops cleanly at a chunk boundary, resumably.
#include "e2e.hpp"
#include "support.hpp"

#include "covergrid/output/hdf5.hpp"

#include <catch2/catch.hpp>
#include <fmt/format.h>
#include <hdf5.h>
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <thread>

namespace fs = std::filesystem;
namespace o = covergrid::output;
using namespace covergrid::test;

namespace {

// One chunk per n row (2048 p points), so a run has 80 chunks to be killed among.
// The grid is an invented test scenario: no number here is a reference value.
const char* scenario_text = R"(
title = "resume and determinism"
seed = 31337
[grid]
n = { from = 1, to = 80 }
p = { from = 0.0005, to = 0.9995, count = 2048 }
levels = [0.95]
sides = ["two-sided", "upper-bound"]
[evaluate]
exact = true
replicates = 500
[[method]]
id = "wilson"
[[method]]
id = "blaker"
[output]
cube = "r.h5"
tables = ""
)";

void write_scenario(const fs::path& dir) { std::ofstream(dir / "r.toml") << scenario_text; }

}  // namespace

TEST_CASE("1 and 2 threads give byte-identical datasets; a SIGKILLed run resumes to the same cube",
          "[cli][e2e][mc][resume][slow]") {
  ScratchDir one("threads-1"), two("threads-2"), killed("killed");
  for (const auto* d : {&one, &two, &killed}) write_scenario(d->path());
  REQUIRE(run(one.path(), {"run", "r.toml", "--threads", "1", "--quiet"}) == 0);
  REQUIRE(run(two.path(), {"run", "r.toml", "--threads", "2", "--quiet"}) == 0);
  same_datasets(one.file("r.h5"), two.file("r.h5"));

  // Kill mid-way: wait until the journal holds some records, then SIGKILL.
  const pid_t pid = spawn(killed.path(), {"run", "r.toml", "--threads", "2", "--quiet"});
  const fs::path journal = killed.path() / "r.h5.journal";
  wait_for_bytes(journal, 20'000'000);
  kill(pid, SIGKILL);
  CHECK(wait_status(pid) == 128 + SIGKILL);
  REQUIRE(fs::exists(journal));
  CHECK_FALSE(fs::exists(killed.path() / "r.h5"));
  // Resume and finish.
  REQUIRE(run(killed.path(), {"run", "r.toml", "--quiet"}) == 0);
  CHECK_FALSE(fs::exists(journal));
  same_datasets(one.file("r.h5"), killed.file("r.h5"));
}

TEST_CASE("SIGINT stops at a chunk boundary and the run resumes", "[cli][e2e][resume][slow]") {
  ScratchDir dir("sigint");
  write_scenario(dir.path());
  const pid_t pid = spawn(dir.path(), {"run", "r.toml", "--threads", "2"});
  const fs::path journal = dir.path() / "r.h5.journal";
  wait_for_bytes(journal, 10'000'000);
  kill(pid, SIGINT);
  const int status = wait_status(pid);
  std::ifstream err(dir.path() / "stderr.txt");
  const std::string text((std::istreambuf_iterator<char>(err)), {});
  INFO(text);
  CHECK(status == 1);
  CHECK(text.find("stopped;") != std::string::npos);
  CHECK(text.find("run the same command to resume") != std::string::npos);
  CHECK(fs::exists(journal));
  CHECK(run(dir.path(), {"run", "r.toml", "--quiet"}) == 0);
  CHECK(fs::exists(dir.path() / "r.h5"));
}

TEST_CASE("a SIGKILLed shard resumes, and its merge equals a single run", "[cli][e2e][shard][resume][slow]") {
  ScratchDir single("shard-single"), shards("shard-killed");
  write_scenario(single.path());
  write_scenario(shards.path());
  REQUIRE(run(single.path(), {"run", "r.toml", "--quiet"}) == 0);
  const pid_t pid = spawn(shards.path(), {"run", "r.toml", "--shard", "1/2", "--threads", "2", "--quiet"});
  const fs::path journal = shards.path() / "r.shard-1-of-2.h5.journal";
  wait_for_bytes(journal, 10'000'000);
  kill(pid, SIGKILL);
  CHECK(wait_status(pid) == 128 + SIGKILL);
  REQUIRE(fs::exists(journal));
  CHECK_FALSE(fs::exists(shards.path() / "r.shard-1-of-2.h5"));
  // Merging now is refused: shard 1/2 is not there.
  CHECK(run(shards.path(), {"run", "r.toml", "--shard", "2/2", "--quiet"}) == 0);
  CHECK(run(shards.path(), {"merge", "r.shard-2-of-2.h5", "-o", "r.h5"}) == 2);
  CHECK_FALSE(fs::exists(shards.path() / "r.h5"));
  // Running the same shard again resumes it from its journal.
  REQUIRE(run(shards.path(), {"run", "r.toml", "--shard", "1/2"}) == 0);
  std::ifstream err(shards.path() / "stderr.txt");
  const std::string text((std::istreambuf_iterator<char>(err)), {});
  CHECK(text.find("resuming the unfinished run in r.shard-1-of-2.h5.journal") != std::string::npos);
  CHECK_FALSE(fs::exists(journal));
  REQUIRE(run(shards.path(), {"merge", "r.shard-1-of-2.h5", "r.shard-2-of-2.h5", "-o", "r.h5"}) == 0);
  same_datasets(single.file("r.h5"), shards.file("r.h5"));
}
