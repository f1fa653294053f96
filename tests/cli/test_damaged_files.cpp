// Damaged files never hang a command: a small cube (and a shard of it) with
// 4 KiB zeroed at every 4 KiB offset, read by inspect, inspect --pair, rank,
// report and merge, each run as a child process with a time limit. Every
// run either refuses the file (exit 2, one line naming it, no output file)
// or gives the undamaged file's answer. Before cube format 3, zeroing 4 KiB
// at offset 4096 made all of them spin forever in HDF5's global-heap read
// of a variable-length string attribute.
#include "cli_call.hpp"
#include "e2e.hpp"
#include "support.hpp"

#include <catch2/catch.hpp>
#include <fmt/format.h>

#include <filesystem>
#include <fstream>
#include <string>
#include <vector>

namespace fs = std::filesystem;
using namespace covergrid::test;

namespace {

// An invented scenario, small so that the sweep stays short: one chunk per
// shard, exact and Monte Carlo results.
const char* scenario = R"(
title = "zeroed blocks"
seed = 2121
[grid]
n = [3, 10]
p = { from = 0.1, to = 0.9, count = 5 }
levels = [0.95]
sides = ["two-sided"]
[evaluate]
exact = true
replicates = 20
[[method]]
id = "wilson"
[[method]]
id = "wald"
[output]
cube = "z.h5"
tables = ""
)";

/// A child's limit: far above what a refusal or an answer takes (well under
/// a second in the Release build, a few in the sanitizer build).
constexpr int limit_seconds = 60;

struct Outcome {
  int status;
  std::string out, err;
};

/// `covergrid ARGS` in `dir` (a shell line; the file names need no quoting).
Outcome run_shell(const fs::path& dir, const std::string& args) {
  const std::string script = fmt::format("exec '{}' {} >out.txt 2>err.txt", COVERGRID_EXE, args);
  const int status = wait_status(spawn(dir, {"-c", script}, "/bin/sh"), limit_seconds);
  return {status, slurp(dir / "out.txt"), slurp(dir / "err.txt")};
}

std::string read_all(const fs::path& p) {
  std::ifstream in(p, std::ios::binary);
  return std::string(std::istreambuf_iterator<char>(in), {});
}

void write_all(const fs::path& p, const std::string& bytes) {
  std::ofstream(p, std::ios::binary | std::ios::trunc) << bytes;
}

std::string zeroed(std::string bytes, std::size_t at) {
  for (std::size_t i = at; i < bytes.size() && i < at + 4096; ++i) bytes[i] = '\0';
  return bytes;
}

bool one_line_naming(const std::string& err, const std::string& file) {
  return !err.empty() && err.find('\n') == err.size() - 1 && err.find(file + ": ") != std::string::npos;
}

}  // namespace

TEST_CASE("a cube with 4 KiB zeroed at any 4 KiB offset is refused or read right, never hangs",
          "[cli][damage][slow]") {
  ScratchDir dir("zeroed-cube");
  std::ofstream(dir.path() / "z.toml") << scenario;
  REQUIRE(run(dir.path(), {"run", "z.toml", "--quiet"}) == 0);
  const std::string good = read_all(dir.path() / "z.h5");
  REQUIRE(good.size() > 8192);
  const std::vector<std::string> commands = {"inspect d.h5", "inspect d.h5 --pair wilson,wald", "rank d.h5",
                                             "report d.h5 -o d.html"};
  // The answers of the undamaged cube under the damaged one's name.
  write_all(dir.path() / "d.h5", good);
  std::vector<std::string> expected;
  for (const auto& c : commands) {
    const auto r = run_shell(dir.path(), c);
    REQUIRE(r.status == 0);
    expected.push_back(r.out);
  }
  fs::remove(dir.path() / "d.html");
  std::size_t refused = 0, answered = 0;
  for (std::size_t at = 0; at < good.size(); at += 4096) {
    write_all(dir.path() / "d.h5", zeroed(good, at));
    for (std::size_t c = 0; c < commands.size(); ++c) {
      const auto r = run_shell(dir.path(), commands[c]);
      INFO("zeroed at " << at << ": covergrid " << commands[c] << ": exit " << r.status << ": " << r.err);
      REQUIRE((r.status == 0 || r.status == 2));
      if (r.status == 2) {
        ++refused;
        CHECK(one_line_naming(r.err, "d.h5"));
        CHECK(r.out.empty());
        CHECK_FALSE(fs::exists(dir.path() / "d.html"));
      } else {
        ++answered;
        // The report carries the cube file's own SHA-256, so its page
        // differs; it must still have been written whole.
        if (c == 3)
          CHECK(fs::file_size(dir.path() / "d.html") > 1000);
        else
          CHECK(r.out == expected[c]);
      }
      fs::remove(dir.path() / "d.html");
    }
  }
  // Most blocks hold metadata or checksummed data: the sweep must refuse.
  CHECK(refused > answered);
}

TEST_CASE("a cube truncated or with flipped bytes is refused or read right, never hangs",
          "[cli][damage][slow]") {
  // Truncations at 1/16 steps of the file and 64 single-byte flips spread
  // over it, each read by inspect (which reads everything) and rank.
  ScratchDir dir("cut-cube");
  std::ofstream(dir.path() / "z.toml") << scenario;
  REQUIRE(run(dir.path(), {"run", "z.toml", "--quiet"}) == 0);
  const std::string good = read_all(dir.path() / "z.h5");
  write_all(dir.path() / "d.h5", good);
  const auto inspect_good = run_shell(dir.path(), "inspect d.h5"),
             rank_good = run_shell(dir.path(), "rank d.h5");
  REQUIRE(inspect_good.status == 0);
  std::vector<std::string> variants;
  for (std::size_t k = 0; k < 16; ++k) variants.push_back(good.substr(0, good.size() * k / 16));
  for (std::size_t k = 0; k < 64; ++k) {
    std::string b = good;
    const std::size_t at = (b.size() - 1) * k / 63;
    b[at] = static_cast<char>(b[at] ^ 0x5a);
    variants.push_back(b);
  }
  std::size_t refused = 0;
  for (std::size_t v = 0; v < variants.size(); ++v) {
    write_all(dir.path() / "d.h5", variants[v]);
    for (const auto& [command, expected] : {std::pair{std::string("inspect d.h5"), inspect_good.out},
                                            std::pair{std::string("rank d.h5"), rank_good.out}}) {
      const auto r = run_shell(dir.path(), command);
      INFO("variant " << v << ": covergrid " << command << ": exit " << r.status << ": " << r.err);
      REQUIRE((r.status == 0 || r.status == 2));
      if (r.status == 2) {
        ++refused;
        CHECK(one_line_naming(r.err, "d.h5"));
        CHECK(r.out.empty());
      } else {
        CHECK(r.out == expected);
      }
    }
  }
  CHECK(refused >= 2 * 16);  // every truncation is refused by both
}

TEST_CASE("merge with a shard zeroed at any 4 KiB offset is refused or merges right, never hangs",
          "[cli][damage][slow]") {
  // Two chunks (1025 p points fill a chunk of 2048 cells with one n row),
  // so that the scenario has two shards.
  ScratchDir single("zeroed-single"), dir("zeroed-shards");
  std::string two_chunks = scenario;
  two_chunks.replace(two_chunks.find("n = [3, 10]"), 11, "n = [3, 4]");
  two_chunks.replace(two_chunks.find("count = 5"), 9, "count = 1025");
  two_chunks.replace(two_chunks.find("replicates = 20"), 15, "replicates = 0");
  std::ofstream(single.path() / "z.toml") << two_chunks;
  std::ofstream(dir.path() / "z.toml") << two_chunks;
  REQUIRE(run(single.path(), {"run", "z.toml", "--quiet"}) == 0);
  REQUIRE(run(dir.path(), {"run", "z.toml", "--quiet", "--shard", "1/2"}) == 0);
  REQUIRE(run(dir.path(), {"run", "z.toml", "--quiet", "--shard", "2/2"}) == 0);
  const std::string good = read_all(dir.path() / "z.shard-1-of-2.h5");
  std::size_t refused = 0;
  for (std::size_t at = 0; at < good.size(); at += 4096) {
    write_all(dir.path() / "d.shard-1-of-2.h5", zeroed(good, at));
    const auto r =
        run_shell(dir.path(), "merge d.shard-1-of-2.h5 z.shard-2-of-2.h5 -o m.h5 --no-tables --quiet");
    INFO("zeroed at " << at << ": exit " << r.status << ": " << r.err);
    REQUIRE((r.status == 0 || r.status == 2));
    if (r.status == 2) {
      ++refused;
      CHECK(one_line_naming(r.err, "d.shard-1-of-2.h5"));
      // ... and the part of it that is damaged: a dataset or group path, the
      // format attribute, or the file's own signature.
      const bool names_part = r.err.find(": HDF5: cannot ") != std::string::npos ||
                              r.err.find(" dataset /") != std::string::npos ||
                              r.err.find("no format = ") != std::string::npos ||
                              r.err.find("is not an HDF5 file") != std::string::npos;
      CHECK(names_part);
      CHECK_FALSE(fs::exists(dir.path() / "m.h5"));
    } else {
      same_datasets(single.file("z.h5"), dir.file("m.h5"));
      fs::remove(dir.path() / "m.h5");
    }
  }
  CHECK(refused > 0);
}

TEST_CASE("fuzz findings: a cube whose damaged dense link storage crashed HDF5 is refused", "[cli][damage]") {
  // scripts/fuzz (fuzz_cube) found this mutation of a cube whose groups kept
  // their links in dense storage: H5Ovisit freed a wild pointer (SEGV).
  // Cubes now keep links compact, under the object header's checksum, and
  // the reader refuses dense link storage before HDF5 walks it.
  ScratchDir dir("fuzz-finding");
  fs::copy_file(COVERGRID_TEST_DATA "/fuzz/cube-dense-links-crash.bin", dir.path() / "d.h5");
  for (const std::string command : {"inspect d.h5", "rank d.h5", "report d.h5 -o d.html"}) {
    const auto r = run_shell(dir.path(), command);
    INFO(command << ": exit " << r.status << ": " << r.err);
    CHECK(r.status == 2);
    CHECK(one_line_naming(r.err, "d.h5"));
    CHECK_THAT(r.err, Catch::Contains("keeps its links in a form covergrid does not write"));
  }
}
