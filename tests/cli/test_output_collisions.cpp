// Outputs never land on inputs or on each other, and names the system cannot
// take are refused up front (exit 2, naming the keys or options, nothing
// written): the cases a fault probe found overwriting files.
#include "support.hpp"

#include "cli_call.hpp"

#include <catch2/catch.hpp>
#include <fmt/format.h>

#include <filesystem>
#include <fstream>

namespace fs = std::filesystem;
using covergrid::test::call;
using covergrid::test::ScratchDir;
using covergrid::test::slurp;

namespace {

std::string scenario(const std::string& output_block) {
  return R"(title = "collisions"
[grid]
n = [5, 9]
p = { from = 0.1, to = 0.9, count = 9 }
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

std::size_t lines(const std::string& s) {
  return static_cast<std::size_t>(std::count(s.begin(), s.end(), '\n'));
}

}  // namespace

TEST_CASE("a cube named like one of the tables is refused naming both keys", "[cli][paths][collision]") {
  // Was exit 0 with the cube overwritten by the summary CSV.
  ScratchDir dir("collide-tables");
  std::ofstream(dir.file("s.toml")) << scenario("[output]\ncube = \"t-summary.csv\"\ntables = \"t\"\n");
  const auto r = call({"run", dir.file("s.toml"), "--quiet"});
  CHECK(r.status == 2);
  CHECK(lines(r.err) == 1);
  CHECK_THAT(r.err, Catch::Contains("s.toml:10: the table") && Catch::Contains("[output] tables = ") &&
                        Catch::Contains("is the same file as [output] cube = "));
  CHECK(entries(dir.path()) == 1);
}

TEST_CASE("a cube named like the scenario file is refused, even with --overwrite",
          "[cli][paths][collision]") {
  // Was: the scenario replaced by the cube.
  ScratchDir dir("collide-scenario");
  const std::string text = scenario("[output]\ncube = \"s.toml\"\ntables = \"\"\n");
  std::ofstream(dir.file("s.toml")) << text;
  for (const std::string flag : {"--quiet", "--overwrite"}) {
    const auto r = call({"run", dir.file("s.toml"), "--quiet", flag});
    CHECK(r.status == 2);
    CHECK_THAT(r.err, Catch::Contains("s.toml:9: [output] cube = ") &&
                          Catch::Contains("is the same file as the scenario file itself"));
    CHECK(slurp(dir.file("s.toml")) == text);
    CHECK(entries(dir.path()) == 1);
  }
}

TEST_CASE("a 300-byte cube or tables name is refused by --dry-run and run before any work",
          "[cli][paths][collision]") {
  // Was: --dry-run accepted it, then the run died with "File name too long"
  // (exit 1), or computed the whole cube before failing on the tables.
  ScratchDir dir("long-names");
  const std::string name(300, 'x');
  for (const auto& [key, block] : std::vector<std::pair<std::string, std::string>>{
           {"cube", "cube = \"" + name + ".h5\"\ntables = \"\"\n"},
           {"tables", "tables = \"" + name + "\"\n"}}) {
    std::ofstream(dir.file("s.toml")) << scenario("[output]\n" + block);
    for (const std::string mode : {"--dry-run", "--quiet"}) {
      const auto r = call({"run", dir.file("s.toml"), mode});
      INFO(key << " " << mode << ": " << r.err);
      CHECK(r.status == 2);
      CHECK_THAT(r.err, Catch::Contains("s.toml:") && Catch::Contains("[output] " + key + " = ") &&
                            Catch::Contains("this folder takes names of at most"));
      CHECK(entries(dir.path()) == 1);
    }
  }
  // A long name that fits (with the 8 bytes the writers add) is taken.
  const std::string fits(240, 'y');
  std::ofstream(dir.file("s.toml")) << scenario("[output]\ncube = \"" + fits + ".h5\"\ntables = \"\"\n");
  CHECK(call({"run", dir.file("s.toml"), "--quiet"}).status == 0);
  CHECK(fs::exists(dir.path() / (fits + ".h5")));
}

TEST_CASE("audit and report -o never replace an input or a cube", "[cli][paths][collision]") {
  ScratchDir dir("collide-o");
  std::ofstream(dir.file("s.toml")) << scenario("[output]\ncube = \"s.h5\"\ntables = \"\"\n");
  REQUIRE(call({"run", dir.file("s.toml"), "--quiet"}).status == 0);
  const std::string cube_bytes = slurp(dir.file("s.h5"));
  const std::string claims = "[[claim]]\nmethod = \"wilson\"\nlevel = 0.95\nn = 30\np = 0.5\n";
  std::ofstream(dir.file("c.toml")) << claims;
  struct Case {
    std::vector<std::string> args;
    std::string said;
  };
  const std::vector<Case> cases = {
      {{"audit", "--claims", dir.file("c.toml"), "-o", dir.file("c.toml")}, "is the same file as the input"},
      {{"audit", "--method", "wilson", "--level", "0.95", "--n", "30", "--p", "0.5", "-o", dir.file("s.h5")},
       "is an HDF5 file (a cube?); covergrid does not replace it with text"},
      {{"report", dir.file("s.h5"), "-o", dir.file("s.h5")}, "is the same file as the input"},
  };
  for (const auto& c : cases) {
    const auto r = call(c.args);
    INFO(c.args[0] << ": " << r.err);
    CHECK(r.status == 2);
    CHECK(lines(r.err) == 1);
    CHECK_THAT(r.err, Catch::Contains("-o ") && Catch::Contains(c.said));
  }
  CHECK(slurp(dir.file("c.toml")) == claims);
  CHECK(slurp(dir.file("s.h5")) == cube_bytes);
}

TEST_CASE("run --overwrite replaces a cube but not a text file at the cube's path",
          "[cli][paths][collision]") {
  ScratchDir dir("overwrite-text");
  std::ofstream(dir.file("s.toml")) << scenario("[output]\ncube = \"notes.txt\"\ntables = \"\"\n");
  std::ofstream(dir.file("notes.txt")) << "field notes\n";
  const auto r = call({"run", dir.file("s.toml"), "--quiet", "--overwrite"});
  CHECK(r.status == 2);
  CHECK_THAT(r.err,
             Catch::Contains("notes.txt: exists and is not an HDF5 file; covergrid replaces only cubes"));
  CHECK(slurp(dir.file("notes.txt")) == "field notes\n");
  // A cube of another scenario there is replaced with --overwrite.
  std::ofstream(dir.file("t.toml")) << "seed = 3\n"
                                    << scenario("[output]\ncube = \"notes.txt\"\ntables = \"\"\n");
  fs::remove(dir.file("notes.txt"));
  REQUIRE(call({"run", dir.file("t.toml"), "--quiet"}).status == 0);
  CHECK(call({"run", dir.file("s.toml"), "--quiet"}).status == 2);
  CHECK(call({"run", dir.file("s.toml"), "--quiet", "--overwrite"}).status == 0);
}
