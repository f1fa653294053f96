// libFuzzer target: the journal reader. Each input is a whole journal file
// of a fixed small scenario (header and records), resumed as `run` resumes
// it: the header and every record are checked, damaged records dropped with
// a note; the only allowed refusals are InputError and CubeError. Every
// input is also decoded as one record payload (decode_chunk).
//
// Seed: with COVERGRID_FUZZ_SEED=FILE set, the first call writes the
// uninterrupted journal of the scenario (all its chunks) to FILE.
#include "covergrid/engine/error.hpp"
#include "covergrid/engine/plan.hpp"
#include "covergrid/engine/run.hpp"
#include "covergrid/output/cube.hpp"
#include "covergrid/scenarios/loader.hpp"

#include <unistd.h>

#include <cstdint>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <string>

namespace fs = std::filesystem;
namespace o = covergrid::output;

namespace {

const char* scenario_text = R"(
title = "fuzzed journal"
seed = 5
[grid]
n = [3, 4]
p = { from = 0.1, to = 0.9, count = 1025 }
levels = [0.95]
sides = ["two-sided"]
[evaluate]
replicates = 4
[[method]]
id = "wilson"
[output]
cube = "j.h5"
tables = ""
)";

struct Setup {
  fs::path dir;
  covergrid::engine::Scenario scenario;
  covergrid::engine::Plan plan;
  Setup() {
    dir = fs::temp_directory_path() / ("covergrid-fuzz-journal-" + std::to_string(::getpid()));
    fs::create_directories(dir);
    scenario = covergrid::scenarios::load_scenario_text(scenario_text, "fuzz.toml", dir.string(), false);
    plan = covergrid::engine::make_plan(scenario);
    if (const char* seed = std::getenv("COVERGRID_FUZZ_SEED")) {
      {
        o::CubeWriter writer(scenario, plan, false);
        for (const auto& c : plan.chunks) writer.write_chunk(covergrid::engine::compute_chunk(scenario, c));
      }
      fs::copy_file(o::journal_path(scenario.cube_path), seed, fs::copy_options::overwrite_existing);
    }
  }
};

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  static Setup setup;
  const std::string bytes(reinterpret_cast<const char*>(data), size);
  {
    covergrid::engine::ChunkResult r;
    r.combos = 1;
    try {
      o::decode_chunk(bytes.data(), bytes.size(), r);
    } catch (const o::CubeError&) {
    }
  }
  std::error_code ec;
  fs::remove(setup.scenario.cube_path, ec);
  fs::remove(setup.scenario.cube_path + ".partial", ec);
  std::ofstream(o::journal_path(setup.scenario.cube_path), std::ios::binary | std::ios::trunc) << bytes;
  try {
    const auto state = o::inspect_output(setup.scenario, false, "all");
    if (state == o::OutputState::resumed) {
      o::CubeWriter writer(setup.scenario, setup.plan, true);
      const auto done = writer.completed();
      if (done.size() != setup.plan.chunks.size()) std::abort();
    }
  } catch (const covergrid::InputError&) {
  } catch (const o::CubeError&) {
  }
  return 0;
}
