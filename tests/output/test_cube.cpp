// The cube against the layout documented in the README ("The result cube"), read back with the raw
// HDF5 API; its values bit-identical to an in-memory run; refusal of other
// scenarios' outputs; damaged and foreign files rejected with InputError.
#include "support.hpp"

#include "cli/cli_call.hpp"
#include "output/damage.hpp"

#include "covergrid/engine/error.hpp"
#include "covergrid/engine/run.hpp"
#include "covergrid/output/cube.hpp"
#include "covergrid/output/hdf5.hpp"
#include "covergrid/output/tables.hpp"
#include "covergrid/version.hpp"

#include <catch2/catch.hpp>
#include <hdf5_hl.h>

#include <atomic>
#include <cstring>
#include <filesystem>
#include <fstream>

namespace e = covergrid::engine;
namespace o = covergrid::output;
namespace fs = std::filesystem;
using covergrid::test::MemorySink;
using covergrid::test::scenario_from;
using covergrid::test::ScratchDir;

namespace {

const char* text = R"(
title = "cube contract"
seed = 77
[grid]
n = [3, 10, 31]
p = { from = 0.02, to = 0.98, count = 49 }
levels = [0.9, 0.95]
sides = ["two-sided", "upper-bound"]
[[method]]
id = "wilson"
[[method]]
id = "blaker"
[[method]]
id = "jeffreys"
boundary = false
[output]
cube = "c.h5"
tables = "c"
)";

void run_to_cube(const e::Scenario& s) {
  const auto state = o::inspect_output(s, false);
  const auto plan = e::make_plan(s);
  o::CubeWriter w(s, plan, state == o::OutputState::resumed);
  e::run_scenario(s, w);
}

std::vector<double> read_all(hid_t file, const std::string& name, std::vector<hsize_t>& dims) {
  o::Handle d = o::open_dataset(file, name);
  dims = o::shape(d.get());
  std::size_t total = 1;
  for (auto v : dims) total *= v;
  std::vector<double> out(total);
  o::read_block(d.get(), std::vector<hsize_t>(dims.size(), 0), dims, out.data());
  return out;
}

}  // namespace

TEST_CASE("the cube holds what the contract says", "[output][cube]") {
  ScratchDir dir("cube");
  const auto s = scenario_from(text, dir.path().string());
  run_to_cube(s);
  REQUIRE(fs::exists(s.cube_path));
  CHECK_FALSE(fs::exists(o::partial_path(s.cube_path)));

  o::File f = o::File::open(s.cube_path, false);
  const hid_t root = f.id();
  CHECK(o::get_attr_string(root, "format") == "covergrid-cube");
  CHECK(o::get_attr_int(root, "format_version") == covergrid::cube_format_version);
  CHECK(o::get_attr_string(root, "tool_version") == covergrid::tool_version);
  CHECK(o::get_attr_string(root, "scenario") == s.source_text);
  CHECK(o::get_attr_string(root, "scenario_sha256") == s.sha256);
  CHECK(o::get_attr_int(root, "seed") == 77);
  CHECK(o::get_attr_string(root, "created_utc").size() == 20);
  CHECK(o::get_attr_string(root, "shard") == "all");
  CHECK(o::get_attr_int(root, "complete") == 1);

  // Every metric group holds the axes (this scenario has no Monte Carlo).
  CHECK_FALSE(o::exists(root, "axes"));
  CHECK_FALSE(o::exists(root, "mc"));
  for (const std::string g : {"/exact/", "/summary/"}) {
    INFO(g);
    CHECK(o::read_strings(root, g + "model") == std::vector<std::string>{"binomial"});
    CHECK(o::read_strings(root, g + "side") == std::vector<std::string>{"two-sided", "upper-bound"});
    CHECK(o::read_doubles(root, g + "level") == s.levels);
    CHECK(o::read_strings(root, g + "method") ==
          std::vector<std::string>{"wilson", "blaker", "jeffreys(boundary=false)"});
    CHECK(o::read_int64s(root, g + "n") == std::vector<std::int64_t>{3, 10, 31});
    CHECK(o::read_doubles(root, g + "p") == s.p);
  }
  // Every numeric dataset is chunked with a Fletcher-32 checksum (HDF5
  // filters no variable-length strings), and every dataset of a metric group
  // has a long_name (and units, but for the string labels).
  for (const auto& name : o::dataset_paths(root)) {
    INFO(name);
    const std::string leaf = name.substr(name.rfind('/') + 1);
    const bool label = leaf == "model" || leaf == "side" || leaf == "method";
    o::Handle d = o::open_dataset(root, name);
    o::Handle dcpl(H5Dget_create_plist(d.get()), H5Pclose);
    unsigned flags = 0;
    std::size_t nelmts = 0;
    unsigned config = 0;
    CHECK((H5Pget_filter_by_id2(dcpl.get(), H5Z_FILTER_FLETCHER32, &flags, &nelmts, nullptr, 0, nullptr,
                                &config) >= 0) == !label);
    if (name.rfind("/progress/", 0) == 0) continue;
    CHECK(o::has_attr(d.get(), "long_name"));
    CHECK(o::has_attr(d.get(), "units") == !label);
  }
  {
    o::Handle d = o::open_dataset(root, "/exact/coverage");
    CHECK(o::get_attr_string(d.get(), "units") == "1");
    CHECK(o::get_attr_string(d.get(), "long_name") == "exact coverage probability P(L <= p <= U)");
    o::Handle n = o::open_dataset(root, "/summary/n");
    CHECK(o::get_attr_string(n.get(), "units") == "count");
  }

  o::Handle jg = o::open_group(root, "/methods/jeffreys(boundary=false)");
  CHECK(o::get_attr_string(jg.get(), "id") == "jeffreys");
  CHECK(o::get_attr_string(jg.get(), "param.boundary") == "false");
  CHECK_FALSE(o::get_attr_string(jg.get(), "reference").empty());

  // The in-memory run of the same scenario, to compare values bit for bit.
  const auto plan = e::make_plan(s);
  MemorySink mem(s, plan);
  e::run_scenario(s, mem);

  const std::vector<hsize_t> want = {1, 2, 2, 3, 3, 49};
  for (std::size_t k = 0; k < e::metric_count; ++k) {
    const std::string name = "/exact/" + std::string(e::metric_names[k]);
    INFO(name);
    std::vector<hsize_t> dims;
    const auto values = read_all(root, name, dims);
    CHECK(dims == want);
    o::Handle d = o::open_dataset(root, name);
    // Every axis scale is attached to its dimension and the dimension is labelled.
    for (unsigned i = 0; i < 6; ++i) {
      o::Handle scale = o::open_dataset(root, std::string("/exact/") + o::axis_names[i]);
      CHECK(H5DSis_attached(d.get(), scale.get(), i) > 0);
      char label[32] = {};
      H5DSget_label(d.get(), i, label, sizeof label);
      CHECK(std::string(label) == o::axis_names[i]);
    }
    // Values: the cube is [model][combo][n][p]; so is the memory sink here.
    CHECK(std::memcmp(values.data(), mem.exact[k].data(), values.size() * sizeof(double)) == 0);
  }
  // NaN exactly where a method does not define a side (blaker, upper-bound).
  {
    std::vector<hsize_t> dims;
    const auto cov = read_all(root, "/exact/coverage", dims);
    const std::size_t per_method = 3 * 49;
    for (std::size_t side = 0; side < 2; ++side)
      for (std::size_t level = 0; level < 2; ++level)
        for (std::size_t method = 0; method < 3; ++method) {
          const std::size_t at = ((side * 2 + level) * 3 + method) * per_method;
          const bool undefined = side == 1 && method == 1;
          for (std::size_t k = 0; k < per_method; ++k) CHECK(std::isnan(cov[at + k]) == undefined);
        }
  }
  for (std::size_t k = 0; k < e::stat_count; ++k) {
    const std::string name = "/summary/" + std::string(e::stat_names[k]);
    INFO(name);
    std::vector<hsize_t> dims;
    const auto values = read_all(root, name, dims);
    CHECK(dims == std::vector<hsize_t>{1, 2, 2, 3, 3});
    CHECK(std::memcmp(values.data(), mem.stats[k].data(), values.size() * sizeof(double)) == 0);
  }
  const auto done = o::read_u8s(root, "/progress/done");
  CHECK(std::all_of(done.begin(), done.end(), [](std::uint8_t v) { return v == 1; }));
}

TEST_CASE("existing outputs are respected", "[output][cube]") {
  ScratchDir dir("respect");
  const auto s = scenario_from(text, dir.path().string());
  run_to_cube(s);
  CHECK(o::inspect_output(s, false) == o::OutputState::up_to_date);
  // A different scenario on the same cube path is refused, and the cube is untouched.
  const auto other =
      scenario_from(std::string(text) + "\n# a comment changes the checksum\n", dir.path().string());
  const auto before = fs::last_write_time(s.cube_path);
  CHECK_THROWS_AS(o::inspect_output(other, false), covergrid::InputError);
  CHECK(fs::last_write_time(s.cube_path) == before);
  CHECK(o::inspect_output(other, true) == o::OutputState::fresh);
}

TEST_CASE("an interrupted run resumes from its journal to the same cube", "[output][cube][resume]") {
  ScratchDir dir("journal");
  const auto s = scenario_from(text, dir.path().string());
  // The reference: an uninterrupted run, moved aside.
  run_to_cube(s);
  const std::string reference = dir.file("reference.h5");
  fs::rename(s.cube_path, reference);

  const auto plan = e::make_plan(s, 4);  // many small chunks
  {
    o::CubeWriter w(s, plan, false);
    std::atomic<bool> stop{false};
    e::RunOptions opt;
    opt.chunk_cells = 4;
    opt.threads = 2;
    opt.stop = &stop;
    opt.progress = [&](std::size_t, std::size_t) { stop = true; };
    const auto report = e::run_scenario(s, w, opt);
    REQUIRE(report.interrupted);
  }
  CHECK_FALSE(fs::exists(s.cube_path));
  REQUIRE(fs::exists(o::journal_path(s.cube_path)));
  // A torn last record (a run killed mid-write) is dropped on resume.
  { std::ofstream(o::journal_path(s.cube_path), std::ios::app | std::ios::binary) << "CKH1 torn record"; }
  const auto other = scenario_from(std::string(text) + "\n# another scenario\n", dir.path().string());
  CHECK_THROWS_WITH(o::inspect_output(other, false),
                    Catch::Contains("unfinished run of a different scenario"));
  REQUIRE(o::inspect_output(s, false) == o::OutputState::resumed);
  {
    o::CubeWriter w(s, plan, true);
    const auto done = w.completed();
    const auto count = std::count(done.begin(), done.end(), 1);
    CHECK(count > 0);
    CHECK(static_cast<std::size_t>(count) < plan.chunks.size());
    e::RunOptions opt;
    opt.chunk_cells = 4;
    const auto report = e::run_scenario(s, w, opt);
    CHECK(report.chunks_resumed == static_cast<std::size_t>(count));
  }
  CHECK_FALSE(fs::exists(o::journal_path(s.cube_path)));
  // Same values as the uninterrupted run (whose chunking differed).
  o::File a = o::File::open(reference, false), b = o::File::open(s.cube_path, false);
  for (const std::string group : {"exact", "summary"})
    for (std::size_t k = 0; k < (group == "exact" ? e::metric_count : e::stat_count); ++k) {
      const std::string name =
          "/" + group + "/" + std::string(group == "exact" ? e::metric_names[k] : e::stat_names[k]);
      INFO(name);
      std::vector<hsize_t> da, db;
      const auto va = read_all(a.id(), name, da), vb = read_all(b.id(), name, db);
      CHECK(da == db);
      CHECK(std::memcmp(va.data(), vb.data(), va.size() * sizeof(double)) == 0);
    }
}

TEST_CASE("foreign and damaged files are rejected as bad input", "[output][cube][bad-input]") {
  ScratchDir dir("foreign");
  const std::string text_file = dir.file("notes.h5");
  std::ofstream(text_file) << "not an HDF5 file\n";
  CHECK_THROWS_WITH(o::CubeReader(text_file), Catch::Contains("is not an HDF5 file"));
  CHECK_THROWS_WITH(o::CubeReader(dir.file("missing.h5")), Catch::Contains("does not exist"));
  {
    o::File f = o::File::create(dir.file("plain.h5"));
    o::set_attr(f.id(), "title", std::string("someone else's"));
  }
  CHECK_THROWS_WITH(o::CubeReader(dir.file("plain.h5")), Catch::Contains("not a covergrid cube"));
  {
    o::File f = o::File::create(dir.file("future.h5"));
    o::set_attr(f.id(), "format", std::string("covergrid-cube"));
    o::set_attr(f.id(), "format_version", std::int64_t{99});
  }
  CHECK_THROWS_WITH(o::CubeReader(dir.file("future.h5")), Catch::Contains("format version 99"));
  // A run whose cube path holds a foreign file refuses to touch it.
  auto s = scenario_from(text, dir.path().string());
  s.cube_path = text_file;
  CHECK_THROWS_AS(o::inspect_output(s, false), covergrid::InputError);
}

TEST_CASE("a damaged chunk is refused by every reader, naming the file and the dataset",
          "[output][cube][bad-input][checksum]") {
  using covergrid::test::call;
  ScratchDir dir("damaged");
  const auto s = scenario_from(std::string(text) + R"(
[evaluate]
replicates = 300
)",
                               dir.path().string());
  run_to_cube(s);
  {
    // The replicate counts are integers in the file.
    o::File f = o::File::open(s.cube_path, false);
    o::Handle d = o::open_dataset(f.id(), "/mc/replicates");
    o::Handle t(H5Dget_type(d.get()), H5Tclose);
    CHECK(H5Tget_class(t.get()) == H5T_INTEGER);
    CHECK(H5Tget_size(t.get()) == 8);
    o::Handle u = o::open_dataset(f.id(), "/mc/coverage");
    CHECK(o::get_attr_string(u.get(), "long_name") == "simulated coverage probability P(L <= p <= U)");
    CHECK(o::get_attr_string(d.get(), "units") == "count");
  }
  const auto intact = call({"inspect", s.cube_path});
  CHECK(intact.status == 0);
  CHECK(intact.out.find("checksums: every chunk of all ") != std::string::npos);
  CHECK(o::CubeReader(s.cube_path).mc_replicates(0, 0) == std::vector<double>(s.p.size(), 300.0));

  // A summary chunk (what the headline reads) and metric chunks: inspect,
  // rank and report verify every chunk before they use the cube.
  for (const std::string dataset : {"/summary/mean_width", "/exact/coverage", "/mc/replicates"}) {
    DYNAMIC_SECTION(dataset) {
      const std::string cube = dir.file("damaged.h5");
      fs::copy_file(s.cube_path, cube, fs::copy_options::overwrite_existing);
      covergrid::test::damage_chunk(cube, dataset);
      const std::string html = dir.file("damaged.html");
      const std::vector<std::vector<std::string>> commands = {
          {"inspect", cube}, {"report", cube, "-o", html}, {"rank", cube}};
      for (const auto& args : commands) {
        INFO(args[0]);
        const auto r = call(args);
        CHECK(r.status == 2);
        CHECK(r.err.find(cube + ": is damaged: dataset " + dataset +
                         " has a storage chunk that fails its Fletcher-32 checksum") != std::string::npos);
        CHECK(r.err.find('\n') == r.err.size() - 1);  // one line
      }
      CHECK_FALSE(fs::exists(html));
      CHECK_FALSE(fs::exists(dir.file("damaged-report.html")));
    }
  }
  // The string axes carry no checksum; inspect compares the groups' copies.
  {
    const std::string cube = dir.file("relabelled.h5");
    fs::copy_file(s.cube_path, cube, fs::copy_options::overwrite_existing);
    {
      o::File f = o::File::open(cube, true);
      o::Handle d = o::open_dataset(f.id(), "/mc/method");
      o::Handle t(H5Dget_type(d.get()), H5Tclose);
      const char* labels[] = {"wilson", "blaker", "jeffreys"};
      o::check(H5Dwrite(d.get(), t.get(), H5S_ALL, H5S_ALL, H5P_DEFAULT, labels), "relabel");
    }
    const auto r = call({"inspect", cube});
    CHECK(r.status == 2);
    CHECK(r.err.find(cube + ": is damaged: dataset /mc/method differs from /summary/method") !=
          std::string::npos);
  }
  // The undamaged cube is still fine and undisturbed by the copies.
  CHECK(call({"rank", s.cube_path}).status == 0);
}

TEST_CASE("summary tables are written from the cube", "[output][tables]") {
  ScratchDir dir("tables");
  const auto s = scenario_from(text, dir.path().string());
  run_to_cube(s);
  o::CubeReader cube(s.cube_path);
  const auto paths = o::write_tables(cube, s.tables_prefix);
  REQUIRE(paths.size() == 3);
  for (const auto& p : paths) CHECK(fs::file_size(p) > 100);
  std::ifstream csv(paths[0]);
  std::string header, row;
  std::getline(csv, header);
  CHECK(header.rfind("model,side,level,method,n,mean_coverage", 0) == 0);
  std::size_t rows = 0;
  while (std::getline(csv, row)) ++rows;
  // 2 sides x 2 levels x 3 methods x 3 n, less blaker's undefined upper-bound rows.
  CHECK(rows == 2 * 2 * 3 * 3 - 2 * 3);
  const auto rank = o::ranking(cube);
  CHECK(rank.size() == 2 * 3 + 2 * 2);
  const std::string md = [&] {
    std::ifstream in(paths[2]);
    return std::string(std::istreambuf_iterator<char>(in), {});
  }();
  CHECK(md.find("long-run property") != std::string::npos);
  CHECK(md.find("qualified statistician") != std::string::npos);
}

TEST_CASE("a run that fails before its first chunk leaves no journal behind", "[output][cube][resume]") {
  ScratchDir dir("first-chunk");
  auto s = scenario_from(R"(
[grid]
n = [12]
p = [0.2, 0.5]
levels = [0.9]
sides = ["lower-bound"]
[[method]]
id = "wilson"
)",
                         dir.path().string());
  s.methods.front().label = "fails-at-seven";
  s.methods.front().method = std::make_shared<covergrid::test::FailsAtSeven>();
  const auto plan = e::make_plan(s);
  {
    o::CubeWriter w(s, plan, false);
    REQUIRE(fs::exists(o::journal_path(s.cube_path)));
    CHECK_THROWS_WITH(e::run_scenario(s, w, {}), Catch::Contains("method 'fails-at-seven'"));
    CHECK(w.discard_if_empty());
  }
  CHECK_FALSE(fs::exists(o::journal_path(s.cube_path)));
  CHECK_FALSE(fs::exists(s.cube_path));
  CHECK(o::inspect_output(s, false) == o::OutputState::fresh);
  // A journal with a chunk in it, or one this writer did not create, stays.
  const auto good = scenario_from(text, dir.path().string());
  const auto good_plan = e::make_plan(good, 4);
  {
    o::CubeWriter w(good, good_plan, false);
    std::atomic<bool> stop{false};
    e::RunOptions opt;
    opt.chunk_cells = 4;
    opt.threads = 1;
    opt.stop = &stop;
    opt.progress = [&](std::size_t, std::size_t) { stop = true; };
    REQUIRE(e::run_scenario(good, w, opt).interrupted);
    CHECK_FALSE(w.discard_if_empty());
  }
  REQUIRE(fs::exists(o::journal_path(good.cube_path)));
  {
    o::CubeWriter w(good, good_plan, true);
    CHECK_FALSE(w.discard_if_empty());
  }
  CHECK(fs::exists(o::journal_path(good.cube_path)));
}
