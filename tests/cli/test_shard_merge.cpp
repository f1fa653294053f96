// Shards and merge end to end: 1, 2 and 3 shards merged give the cube a
// single run writes (every dataset byte-identical, every attribute equal but
// the creation time), for rows split over chunks and for whole-row chunks;
// every refusal of merge (exit 2, the files named, nothing written); bad
// --shard values. The scenarios are invented test grids: no number here is a
// reference value.
#include "e2e.hpp"
#include "support.hpp"

#include "cli_call.hpp"
#include "output/damage.hpp"
#include "covergrid/cli/cli.hpp"
#include "covergrid/output/hdf5.hpp"

#include <catch2/catch.hpp>
#include <fmt/format.h>

#include <filesystem>
#include <fstream>
#include <sstream>

namespace fs = std::filesystem;
using covergrid::test::call;
using covergrid::test::slurp;
namespace o = covergrid::output;
using namespace covergrid::test;

namespace {

// Rows split over two chunks (2500 p > 2048), two models, Monte Carlo, a
// method without one-sided limits (NaN cells): 24 chunks.
const char* split_rows = R"(
title = "split rows"
seed = 404
[grid]
n = { from = 1, to = 6 }
p = { from = 0.0004, to = 0.9996, count = 2500 }
levels = 0.9
sides = ["two-sided", "lower-bound"]
[evaluate]
replicates = 100
[[method]]
id = "wilson"
[[method]]
id = "blaker"
[[model]]
kind = "binomial"
label = "first"
[[model]]
kind = "binomial"
label = "second"
[output]
cube = "s.h5"
tables = "s"
)";

// Whole rows of p per chunk (6 rows x 300 p): 7 chunks, exact only.
const char* whole_rows = R"(
title = "whole rows"
[grid]
n = { from = 1, to = 40 }
p = { from = 0.01, to = 0.99, count = 300 }
levels = [0.9, 0.95]
[[method]]
id = "wald"
[[method]]
id = "clopper-pearson"
[[method]]
id = "mid-p"
[output]
cube = "s.h5"
tables = "s"
)";

fs::path scenario_in(const fs::path& dir, const std::string& text) {
  fs::create_directories(dir);
  std::ofstream(dir / "s.toml") << text;
  return dir / "s.toml";
}

/// Runs shards 1..N of the scenario in `dir`; returns their cube paths, last first.
std::vector<std::string> run_shards(const fs::path& dir, const std::string& text, std::size_t N) {
  const fs::path file = scenario_in(dir, text);
  std::vector<std::string> cubes;
  for (std::size_t k = 1; k <= N; ++k) {
    const auto r = call({"run", file.string(), "--shard", fmt::format("{}/{}", k, N), "--quiet"});
    INFO(r.err);
    REQUIRE(r.status == 0);
    const std::string width = std::to_string(N);
    std::string index = std::to_string(k);
    index.insert(0, width.size() - index.size(), '0');
    cubes.insert(cubes.begin(), (dir / fmt::format("s.shard-{}-of-{}.h5", index, N)).string());
    REQUIRE(fs::exists(cubes.front()));
    CHECK(r.out.find(fmt::format("shard {}/{}: chunks", k, N)) != std::string::npos);
  }
  return cubes;
}

void set_root_attr(const std::string& path, const std::string& name, const std::string& value) {
  o::File f = o::File::open(path, true);
  o::set_attr(f.id(), name, value);
}
void set_root_attr(const std::string& path, const std::string& name, std::int64_t value) {
  o::File f = o::File::open(path, true);
  o::set_attr(f.id(), name, value);
}

/// Calls merge and checks the refusal: exit 2, a message containing every
/// string of `expected`, no output written.
void refused(const std::vector<std::string>& args, const std::vector<std::string>& expected,
             const fs::path& out) {
  const auto r = call(args);
  INFO(r.err);
  CHECK(r.status == 2);
  for (const auto& e : expected) CHECK(r.err.find(e) != std::string::npos);
  CHECK_FALSE(fs::exists(out));
  CHECK_FALSE(fs::exists(out.string() + ".partial"));
}

}  // namespace

TEST_CASE("1, 2 and 3 shards merged give the single run's cube", "[cli][e2e][shard][merge]") {
  for (const char* text : {split_rows, whole_rows}) {
    ScratchDir dir("merge");
    INFO(text);
    const fs::path single = scenario_in(dir.path() / "single", text);
    REQUIRE(call({"run", single.string(), "--quiet"}).status == 0);
    const std::string reference = (dir.path() / "single" / "s.h5").string();
    for (std::size_t N : {1, 2, 3}) {
      INFO("N = " << N);
      const fs::path folder = dir.path() / fmt::format("n{}", N);
      const auto shards = run_shards(folder, text, N);
      // A shard cube says which shard it is and which chunks it holds.
      CHECK(call({"inspect", shards.back()}).out.find(fmt::format("shard 1/{} of a scenario", N)) !=
            std::string::npos);
      std::vector<std::string> args = {"merge"};
      args.insert(args.end(), shards.begin(), shards.end());  // last shard first: order does not matter
      const std::string merged = (folder / "s.h5").string();
      args.insert(args.end(), {"-o", merged, "--quiet"});
      const auto r = call(args);
      INFO(r.err);
      REQUIRE(r.status == 0);
      same_datasets(reference, merged);
      same_attributes(reference, merged, {". @ created_utc"});
      CHECK(slurp(folder / "s-summary.csv") == slurp(dir.path() / "single" / "s-summary.csv"));
      CHECK(slurp(folder / "s-ranking.csv") == slurp(dir.path() / "single" / "s-ranking.csv"));
    }
  }
}

TEST_CASE("a shard cube holds its chunks only and records them", "[cli][e2e][shard]") {
  ScratchDir dir("shard-cube");
  const auto shards = run_shards(dir.path(), split_rows, 3);
  o::File f = o::File::open(shards[1], false);  // shard 2/3
  CHECK(o::get_attr_string(f.id(), "shard") == "2/3");
  CHECK(o::get_attr_int(f.id(), "complete") == 1);
  const auto ids = o::read_int64s(f.id(), "/progress/shard_chunks");
  const auto done = o::read_u8s(f.id(), "/progress/done");
  REQUIRE(done.size() == 24);
  REQUIRE_FALSE(ids.empty());
  std::size_t marked = 0;
  for (auto d : done) marked += d;
  CHECK(marked == ids.size());
  for (auto id : ids) CHECK(done[static_cast<std::size_t>(id)] == 1);
  // Shards hold no grid statistics of split rows (merge computes them).
  const auto first = o::read_int64s(f.id(), "/summary/n");
  CHECK(first.size() == 6);
}

TEST_CASE("bad --shard values are refused before anything is written", "[cli][shard]") {
  ScratchDir dir("bad-shard");
  const fs::path file = scenario_in(dir.path(), split_rows);
  for (const auto& [value, message] : std::vector<std::pair<std::string, std::string>>{
           {"3/2", "--shard 3/2: K must be from 1 to N = 2"},
           {"1/25", "--shard 1/25: this scenario has 24 chunks, so N can be at most 24"},
           {"two/4", "--shard two/4: expected K/N"},
           {"0/3", "--shard 0/3: K must be from 1 to N = 3"}}) {
    const auto r = call({"run", file.string(), "--shard", value});
    INFO(r.err);
    CHECK(r.status == 2);
    CHECK(r.err.find(message) != std::string::npos);
  }
  CHECK(std::distance(fs::directory_iterator(dir.path()), fs::directory_iterator()) == 1);
  const auto plan = call({"run", file.string(), "--shard", "2/4", "--dry-run"});
  CHECK(plan.status == 0);
  // 1861 = 2048 / (1 + 100 replicates / 1000): Monte Carlo chunks hold fewer cells.
  CHECK(plan.out.find("chunks: 24 of 1 n x 1861 p") != std::string::npos);
  CHECK(plan.out.find("shard 2/4: chunks ") != std::string::npos);
  CHECK(std::distance(fs::directory_iterator(dir.path()), fs::directory_iterator()) == 1);
}

TEST_CASE("merge refuses foreign, mismatched, overlapping, missing and incomplete shards",
          "[cli][e2e][shard][merge]") {
  ScratchDir dir("refuse");
  const auto two = run_shards(dir.path() / "two", split_rows, 2);  // {2/2, 1/2}
  const std::string s1 = two[1], s2 = two[0];
  const auto three = run_shards(dir.path() / "three", split_rows, 3);
  std::string other = split_rows;
  other.replace(other.find("seed = 404"), 10, "seed = 405");
  const auto foreign = run_shards(dir.path() / "other", other, 2);
  const fs::path out = dir.path() / "merged.h5";
  const std::string o_ = out.string();
  auto copy = [&](const std::string& from, const std::string& name) {
    const std::string to = (dir.path() / name).string();
    fs::copy_file(from, to);
    return to;
  };

  refused({"merge", s1, foreign[0], "-o", o_}, {s1, foreign[0], "are shards of different scenarios"}, out);
  const std::string old_tool = copy(s2, "old-tool.h5");
  set_root_attr(old_tool, "tool_version", std::string("0.0.1"));
  refused({"merge", s1, old_tool, "-o", o_}, {old_tool, "was written by covergrid 0.0.1"}, out);
  const std::string new_format = copy(s2, "new-format.h5");
  set_root_attr(new_format, "format_version", std::int64_t{99});
  refused({"merge", s1, new_format, "-o", o_}, {new_format, "has cube format version 99"}, out);
  const std::string again = copy(s1, "again.h5");
  refused({"merge", s1, s2, again, "-o", o_}, {s1, again, "are both shard 1/2: the shards overlap"}, out);
  refused({"merge", s1, s1, s2, "-o", o_}, {s1, "is given twice"}, out);
  refused({"merge", s1, "-o", o_}, {"1 of 2 shards is missing: 2/2"}, out);
  // A shard with a damaged storage chunk (its checksum fails): refused, the
  // shard and the dataset named, and no output (not even the .partial) left.
  const std::string damaged = copy(s2, "damaged.h5");
  damage_chunk(damaged, "/mc/coverage");
  refused({"merge", s1, damaged, "-o", o_},
          {damaged +
           ": is damaged: dataset /mc/coverage has a storage chunk that fails its Fletcher-32 checksum"},
          out);
  refused({"merge", three[2], three[0], "-o", o_}, {"1 of 3 shards is missing: 2/3"}, out);
  refused({"merge", s1, three[1], "-o", o_}, {s1, three[1], "different numbers N"}, out);
  const std::string unfinished = copy(s2, "unfinished.h5");
  set_root_attr(unfinished, "complete", std::int64_t{0});
  refused({"merge", s1, unfinished, "-o", o_}, {unfinished, "is an incomplete shard 2/2"}, out);
  const fs::path single = scenario_in(dir.path() / "single", split_rows);
  REQUIRE(call({"run", single.string(), "--quiet"}).status == 0);
  const std::string whole = (dir.path() / "single" / "s.h5").string();
  refused({"merge", s1, whole, "-o", o_}, {whole, "is a whole cube"}, out);
  std::ofstream(dir.path() / "notes.h5") << "not a cube\n";
  const std::string notes = (dir.path() / "notes.h5").string();
  refused({"merge", s1, notes, "-o", o_}, {notes, "is not an HDF5 file"}, out);
  refused({"merge", s1, s2, "-o", (dir.path() / "missing" / "m.h5").string()}, {"does not exist"},
          dir.path() / "missing" / "m.h5");
  // The output is never an input and is replaced only with --overwrite.
  const auto in_place = call({"merge", s1, s2, "-o", s1});
  CHECK(in_place.status == 2);
  CHECK(in_place.err.find("is the same file as the input " + s1) != std::string::npos);
  std::ofstream(out) << "keep me\n";
  const auto kept = call({"merge", s1, s2, "-o", o_});
  CHECK(kept.status == 2);
  CHECK(kept.err.find(o_ + ": exists") != std::string::npos);
  CHECK(slurp(out) == "keep me\n");
  // --overwrite replaces only a cube (an HDF5 file), never a text file.
  const auto text_kept = call({"merge", s1, s2, "-o", o_, "--overwrite", "--quiet", "--no-tables"});
  CHECK(text_kept.status == 2);
  CHECK(text_kept.err.find("covergrid replaces only cubes") != std::string::npos);
  CHECK(slurp(out) == "keep me\n");
  fs::copy_file(s1, out, fs::copy_options::overwrite_existing);
  const auto replaced = call({"merge", s1, s2, "-o", o_, "--overwrite", "--quiet", "--no-tables"});
  INFO(replaced.err);
  CHECK(replaced.status == 0);
  same_datasets(whole, o_);
}
