// The MPI build end to end (compiled only with -DCOVERGRID_MPI=ON): mpirun
// with 2 ranks writes the single-process cube (every dataset byte-identical,
// attributes equal but the creation time) and both ranks compute chunks; a
// failing rank fails the job with a message naming it and leaves a journal
// that a plain run resumes to the same cube; a shard run under mpirun merges
// with a plain one; bad input is exit 2 with one message. The scenario is an
// invented test grid: no number here is a reference value.
#ifdef COVERGRID_MPI
#include "e2e.hpp"
#include "support.hpp"

#include <catch2/catch.hpp>

#include <cstdlib>
#include <filesystem>
#include <fstream>

namespace fs = std::filesystem;
using namespace covergrid::test;

namespace {

// Rows split over two p-blocks (2500 p), Monte Carlo: 40 chunks.
const char* scenario_text = R"(
title = "mpi"
seed = 77
[grid]
n = { from = 1, to = 20 }
p = { from = 0.0004, to = 0.9996, count = 2500 }
levels = 0.95
sides = ["two-sided", "upper-bound"]
[evaluate]
replicates = 200
[[method]]
id = "wilson"
[[method]]
id = "blaker"
[output]
cube = "m.h5"
tables = "m"
)";

void write_scenario(const fs::path& dir) { std::ofstream(dir / "m.toml") << scenario_text; }

std::string stderr_of(const fs::path& dir) {
  std::ifstream in(dir / "stderr.txt");
  return std::string(std::istreambuf_iterator<char>(in), {});
}

/// mpirun -n 2 (oversubscribed: the test machine may have fewer cores) with
/// covergrid and `args`, in `dir`. Open MPI refuses root without the two
/// variables (Open MPI 4.1 mpirun(1)).
int mpirun(const fs::path& dir, const std::vector<std::string>& args) {
  setenv("OMPI_ALLOW_RUN_AS_ROOT", "1", 1);
  setenv("OMPI_ALLOW_RUN_AS_ROOT_CONFIRM", "1", 1);
  std::vector<std::string> all = {"-n",         "2", "--oversubscribe", "-x", "COVERGRID_MPI_FAIL_AFTER",
                                  COVERGRID_EXE};
  all.insert(all.end(), args.begin(), args.end());
  return wait_status(spawn(dir, all, COVERGRID_MPIRUN));
}

}  // namespace

TEST_CASE("mpirun -n 2 writes the single-process cube", "[cli][e2e][mpi][slow]") {
  ScratchDir single("mpi-single"), ranks("mpi-ranks");
  write_scenario(single.path());
  write_scenario(ranks.path());
  REQUIRE(run(single.path(), {"run", "m.toml", "--quiet"}) == 0);
  setenv("COVERGRID_MPI_FAIL_AFTER", "", 1);  // set, so that -x always finds it
  const int status = mpirun(ranks.path(), {"run", "m.toml", "--threads", "1"});
  const std::string err = stderr_of(ranks.path());
  INFO(err);
  REQUIRE(status == 0);
  same_datasets(single.file("m.h5"), ranks.file("m.h5"));
  same_attributes(single.file("m.h5"), ranks.file("m.h5"), {". @ created_utc"});
  CHECK_FALSE(fs::exists(ranks.path() / "m.h5.journal"));
  // Both ranks computed some of the 40 chunks.
  CHECK(err.find("covergrid: 2 ranks computed 40 chunks (rank 0: ") != std::string::npos);
  CHECK(err.find("rank 1: 0)") == std::string::npos);
  CHECK(err.find("rank 0: 0,") == std::string::npos);
}

TEST_CASE("a failing rank fails the job and leaves a resumable journal", "[cli][e2e][mpi][resume][slow]") {
  ScratchDir single("mpi-single"), failed("mpi-failed");
  write_scenario(single.path());
  write_scenario(failed.path());
  REQUIRE(run(single.path(), {"run", "m.toml", "--quiet"}) == 0);
  setenv("COVERGRID_MPI_FAIL_AFTER", "3", 1);
  const int status = mpirun(failed.path(), {"run", "m.toml", "--threads", "1"});
  setenv("COVERGRID_MPI_FAIL_AFTER", "", 1);  // set, so that -x always finds it
  const std::string err = stderr_of(failed.path());
  INFO(err);
  CHECK(status == 1);
  CHECK(err.find("covergrid: rank 1 failed: injected failure after 3 chunks") != std::string::npos);
  CHECK(err.find("chunks are saved in m.h5.journal; run the same command") != std::string::npos);
  REQUIRE(fs::exists(failed.path() / "m.h5.journal"));
  CHECK_FALSE(fs::exists(failed.path() / "m.h5"));
  // A plain run resumes it.
  REQUIRE(run(failed.path(), {"run", "m.toml"}) == 0);
  CHECK(stderr_of(failed.path()).find("resuming the unfinished run") != std::string::npos);
  same_datasets(single.file("m.h5"), failed.file("m.h5"));
}

TEST_CASE("a shard run under mpirun merges with a plain one, and bad input is exit 2",
          "[cli][e2e][mpi][shard]") {
  ScratchDir single("mpi-single"), shards("mpi-shards");
  write_scenario(single.path());
  write_scenario(shards.path());
  REQUIRE(run(single.path(), {"run", "m.toml", "--quiet"}) == 0);
  setenv("COVERGRID_MPI_FAIL_AFTER", "", 1);  // set, so that -x always finds it
  REQUIRE(mpirun(shards.path(), {"run", "m.toml", "--shard", "1/2", "--quiet"}) == 0);
  REQUIRE(run(shards.path(), {"run", "m.toml", "--shard", "2/2", "--quiet"}) == 0);
  REQUIRE(run(shards.path(), {"merge", "m.shard-1-of-2.h5", "m.shard-2-of-2.h5", "-o", "m.h5"}) == 0);
  same_datasets(single.file("m.h5"), shards.file("m.h5"));

  CHECK(mpirun(shards.path(), {"run", "absent.toml"}) == 2);
  const std::string err = stderr_of(shards.path());
  INFO(err);
  const std::string message = "covergrid: absent.toml: cannot open the scenario file";
  CHECK(err.find(message) != std::string::npos);
  CHECK(err.find(message, err.find(message) + 1) == std::string::npos);  // once, from rank 0
  CHECK(mpirun(shards.path(), {"run", "m.toml", "--shard", "9/2"}) == 2);
}
#endif
