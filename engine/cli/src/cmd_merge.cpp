// covergrid merge: join the shard cubes of one scenario (run --shard K/N)
// into the cube a single run writes, then its tables and headline.
#include "commands.hpp"
#include "covergrid/engine/output_location.hpp"
#include "covergrid/output/cube.hpp"
#include "covergrid/output/merge.hpp"
#include "covergrid/output/tables.hpp"
#include "covergrid/scenarios/loader.hpp"

#include <fmt/format.h>

#include <filesystem>
#include <memory>

namespace covergrid::cli {

namespace {

struct MergeArgs {
  std::vector<std::string> shards;
  std::string out;
  bool overwrite = false, no_tables = false, quiet = false;
};

int cmd_merge(const MergeArgs& a, std::ostream& out, std::ostream& err) {
  namespace fs = std::filesystem;
  for (const std::string& problem : {engine::output_location_problem(a.out),
                                     engine::replacement_problem(a.out, a.shards, engine::Replaces::cube)})
    if (!problem.empty()) throw InputError("-o " + a.out, problem);
  const std::string out_dir = fs::path(a.out).parent_path().string();
  engine::Scenario scenario;
  const auto loader = [&](const std::string& text, const std::string& name) {
    return scenarios::load_scenario_text(text, name, out_dir, false);
  };
  const output::MergeReport report = output::merge_shards(a.shards, a.out, a.overwrite, loader, scenario);
  if (!a.quiet)
    err << fmt::format("covergrid: merged {} shards ({} chunks) into {}\n", report.shards, report.chunks,
                       a.out);
  output::CubeReader cube(a.out);
  out << fmt::format("{}\ncube: {}\n", scenario.title.empty() ? cube.attr("title") : scenario.title, a.out);
  // The tables go beside the merged cube, under the scenario's table name.
  if (!a.no_tables && !scenario.tables_prefix.empty()) {
    const std::string prefix = (fs::path(out_dir) / fs::path(scenario.tables_prefix).filename()).string();
    for (const auto& p : output::write_tables(cube, prefix)) out << "table: " << p << '\n';
  }
  out << output::headline(cube);
  return exit_ok;
}

}  // namespace

Command add_merge_command(CLI::App& app) {
  auto a = std::make_shared<MergeArgs>();
  auto* merge = app.add_subcommand("merge",
                                   "Join the shard cubes of one scenario (run --shard K/N) into the cube a "
                                   "single run writes; every input is "
                                   "checked first and nothing is written if any is refused");
  merge->add_option("SHARDS", a->shards, "the shard cubes, all N of them, in any order")->required();
  merge->add_option("-o,--output", a->out, "the merged cube to write")->required();
  merge->add_flag("--overwrite", a->overwrite, "replace the output if it exists");
  merge->add_flag("--no-tables", a->no_tables, "write only the cube, not the summary tables");
  merge->add_flag("--quiet", a->quiet, "no message on stderr");
  return {merge, [a](std::ostream& out, std::ostream& err) { return cmd_merge(*a, out, err); }};
}

}  // namespace covergrid::cli
