// Every output location is checked before any work starts (exit 2, the
// option or file:line and key, the system's reason, nothing created), and a
// run states its estimated time and size first and asks for --yes when it
// is large. /sys stands for a folder that refuses new files even to root
// (sysfs: EACCES), so the tests hold as root and as an ordinary user.
#include "support.hpp"

#include "cli_call.hpp"

#include <catch2/catch.hpp>
#include <fmt/format.h>

#include <filesystem>
#include <fstream>

namespace fs = std::filesystem;
using covergrid::test::call;
using covergrid::test::ScratchDir;

namespace {

std::string scenario(const std::string& output_block) {
  return R"(title = "output locations"
[grid]
n = { from = 5, to = 20 }
p = { from = 0.05, to = 0.95, count = 19 }
levels = [0.95]
[[method]]
id = "wilson"
)" + output_block;
}

std::size_t entries(const fs::path& dir) {
  std::size_t k = 0;
  for ([[maybe_unused]] const auto& e : fs::directory_iterator(dir)) ++k;
  return k;
}

}  // namespace

TEST_CASE("run refuses an unwritable cube or tables location before any work", "[cli][paths]") {
  ScratchDir dir("paths-run");
  {
    std::ofstream(dir.file("ro-cube.toml")) << scenario("[output]\ncube = \"/sys/covergrid-test.h5\"\n");
    const auto r = call({"run", dir.file("ro-cube.toml"), "--quiet"});
    CHECK(r.status == 2);
    CHECK(r.err.find("ro-cube.toml:9: [output] cube = \"/sys/covergrid-test.h5\"") != std::string::npos);
    CHECK(r.err.find("cannot create files in the folder /sys") != std::string::npos);
    CHECK(r.err.find("internal error") == std::string::npos);
  }
  {
    // The tables prefix is checked up front too: no cube, no journal.
    std::ofstream(dir.file("ro-tables.toml"))
        << scenario("[output]\ncube = \"fine.h5\"\ntables = \"/sys/covergrid-tables\"\n");
    const auto r = call({"run", dir.file("ro-tables.toml"), "--quiet"});
    CHECK(r.status == 2);
    CHECK(r.err.find("ro-tables.toml:10: [output] tables = \"/sys/covergrid-tables\"") != std::string::npos);
    CHECK(r.err.find("cannot create files in the folder /sys: ") != std::string::npos);
    CHECK(!fs::exists(dir.file("fine.h5")));
    CHECK(!fs::exists(dir.file("fine.h5.journal")));
  }
  {
    // A path through a file says so, instead of "the folder does not exist".
    std::ofstream(dir.file("base.toml")) << scenario("[output]\ncube = \"base.toml/x.h5\"\n");
    const auto r = call({"run", dir.file("base.toml"), "--quiet"});
    CHECK(r.status == 2);
    CHECK(r.err.find("base.toml is a file, not a folder") != std::string::npos);
    CHECK(r.err.find("does not exist") == std::string::npos);
  }
  {
    std::ofstream(dir.file("missing.toml")) << scenario("[output]\ncube = \"nowhere/x.h5\"\n");
    const auto r = call({"run", dir.file("missing.toml"), "--quiet"});
    CHECK(r.status == 2);
    CHECK(r.err.find("the folder " + dir.file("nowhere") + " does not exist") != std::string::npos);
  }
  {
    fs::create_directory(dir.file("taken.h5"));
    std::ofstream(dir.file("folder.toml")) << scenario("[output]\ncube = \"taken.h5\"\n");
    const auto r = call({"run", dir.file("folder.toml"), "--quiet"});
    CHECK(r.status == 2);
    CHECK(r.err.find("is a folder, not a file") != std::string::npos);
  }
  CHECK(entries(dir.path()) == 6);  // the five scenario files and the folder, nothing else
}

TEST_CASE("a folder where a writer's temporary file goes is refused before any work", "[cli][paths]") {
  ScratchDir dir("paths-partial");
  std::ofstream(dir.file("m.toml")) << scenario("[output]\ncube = \"m.h5\"\ntables = \"\"\n");
  for (const char* suffix : {".partial", ".journal"}) {
    INFO(suffix);
    const std::string blocker = dir.file(std::string("m.h5") + suffix);
    fs::create_directory(blocker);
    std::ofstream(blocker + "/keep") << "x";
    const auto r = call({"run", dir.file("m.toml"), "--quiet"});
    CHECK(r.status == 2);
    CHECK(r.err.find(blocker + " is a folder in the way") != std::string::npos);
    CHECK(!fs::exists(dir.file("m.h5")));
    CHECK(fs::exists(blocker + "/keep"));  // left as it was
    fs::remove_all(blocker);
  }
  REQUIRE(call({"run", dir.file("m.toml"), "--quiet"}).status == 0);
  fs::create_directory(dir.file("q.html.partial"));
  const auto report = call({"report", dir.file("m.h5"), "-o", dir.file("q.html")});
  CHECK(report.status == 2);
  CHECK(report.err.find(dir.file("q.html.partial") + " is a folder in the way") != std::string::npos);
  CHECK(fs::is_directory(dir.file("q.html.partial")));
  CHECK(!fs::exists(dir.file("q.html")));
}

TEST_CASE("report, audit and merge check -o before any work", "[cli][paths]") {
  ScratchDir dir("paths-o");
  std::ofstream(dir.file("s.toml")) << scenario("[output]\ncube = \"s.h5\"\ntables = \"\"\n");
  REQUIRE(call({"run", dir.file("s.toml"), "--quiet"}).status == 0);
  const auto before = entries(dir.path());
  const auto report = call({"report", dir.file("s.h5"), "-o", "/sys/covergrid-report.html"});
  CHECK(report.status == 2);
  CHECK(report.err.find("-o /sys/covergrid-report.html: cannot create files in the folder /sys") !=
        std::string::npos);
  const auto audit = call({"audit", "--method", "wilson", "--level", "0.95", "--n", "5:20", "--p", "0:1",
                           "-o", dir.file("no/such/folder/v.txt")});
  CHECK(audit.status == 2);
  CHECK(audit.err.find("does not exist") != std::string::npos);
  const auto merge = call({"merge", dir.file("s.h5"), "-o", "/sys/covergrid-merged.h5"});
  CHECK(merge.status == 2);
  CHECK(merge.err.find("-o /sys/covergrid-merged.h5: cannot create files") != std::string::npos);
  CHECK(entries(dir.path()) == before);
}

TEST_CASE("run states its estimate and asks for --yes when the run is large", "[cli][paths][estimate]") {
  ScratchDir dir("large");
  // 10^5 n x 10^4 p = 10^9 cells (counted from the grid): hours of work and
  // tens of GB of data, above the project's own large-run thresholds (an
  // invented grid: no number here is a reference value).
  std::ofstream(dir.file("huge.toml")) << R"([grid]
n = { from = 1, to = 100000 }
p = { from = 0.0001, to = 0.9999, count = 10000 }
levels = [0.95]
[[method]]
id = "wald"
[output]
cube = "huge.h5"
)";
  const auto dry = call({"run", dir.file("huge.toml"), "--dry-run"});
  CHECK(dry.status == 0);
  CHECK(dry.out.find("estimate: 1000000000 cells to compute") != std::string::npos);
  CHECK(dry.out.find("GB uncompressed") != std::string::npos);
  CHECK(dry.out.find("this is a large run") != std::string::npos);
  const auto run = call({"run", dir.file("huge.toml"), "--quiet"});
  CHECK(run.status == 2);
  CHECK(run.err.find("--yes: this run is large") != std::string::npos);
  CHECK(entries(dir.path()) == 1);  // nothing created

  // A small run prints its estimate on stderr as it starts, and is not large;
  // its cell count is the grid's own: 16 n (5..20) x 19 p = 304.
  std::ofstream(dir.file("small.toml")) << scenario("[output]\ncube = \"small.h5\"\ntables = \"\"\n");
  const auto small_dry = call({"run", dir.file("small.toml"), "--dry-run"});
  CHECK(small_dry.out.find("estimate: 304 cells to compute") != std::string::npos);
  CHECK(small_dry.out.find("large run") == std::string::npos);
  const auto small = call({"run", dir.file("small.toml")});
  CHECK(small.status == 0);
  CHECK(small.err.find("304 cells to compute") != std::string::npos);
}
