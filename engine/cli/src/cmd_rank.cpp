// covergrid rank: methods ordered by a stated criterion per (model, side,
// level) and n band of a cube.
#include "commands.hpp"
#include "covergrid/output/rank.hpp"

#include <fmt/format.h>

#include <memory>

namespace covergrid::cli {

namespace {

struct RankArgs {
  std::string cube, criterion = "shortest", bands, format = "text";
  double tolerance = 0;
  bool no_pairs = false;
};

int cmd_rank(const RankArgs& a, std::ostream& out) {
  output::RankOptions o;
  if (a.criterion == "shortest")
    o.criterion = output::RankCriterion::shortest;
  else if (a.criterion == "closest")
    o.criterion = output::RankCriterion::closest;
  else if (a.criterion == "safest")
    o.criterion = output::RankCriterion::safest;
  else
    throw InputError("--criterion",
                     fmt::format("\"{}\" is not one of shortest, closest, safest", a.criterion));
  if (!(a.tolerance >= 0 && a.tolerance < 1))
    throw InputError("--tolerance", fmt::format("{:g} is outside [0, 1)", a.tolerance));
  o.tolerance = a.tolerance;
  if (a.format != "text" && a.format != "csv")
    throw InputError("--format", fmt::format("\"{}\" is not one of text, csv", a.format));
  if (!a.bands.empty()) {
    std::size_t start = 0;
    while (true) {
      const auto comma = a.bands.find(',', start);
      const std::string band = a.bands.substr(start, comma - start);
      if (band.find(':') == std::string::npos || band.find(':') != band.rfind(':'))
        throw InputError("--bands " + a.bands, fmt::format("\"{}\" is not a band A:B", band));
      const auto set = parse_n_set(band, "--bands");
      o.bands.emplace_back(set.front(), set.back());
      if (comma == std::string::npos) break;
      start = comma + 1;
    }
  }
  o.paired = !a.no_pairs;
  const output::CubeReader cube(a.cube);  // validates the layout (exit 2 naming the dataset)
  cube.require_whole();                   // a shard or an unfinished run has partial summaries
  // rank reads only the summaries, but a cube damaged anywhere is refused
  // (exit 2, naming the dataset) rather than ranked.
  cube.verify();
  const auto groups = output::rank_methods(cube, o);
  out << (a.format == "csv" ? output::rank_csv(cube, groups) : output::rank_text(cube, groups, o));
  return exit_ok;
}

}  // namespace

Command add_rank_command(CLI::App& app) {
  auto a = std::make_shared<RankArgs>();
  auto* rank = app.add_subcommand("rank", "Methods of a cube ranked by a stated criterion, per n band");
  rank->add_option("CUBE", a->cube, "cube file (.h5)")->required();
  rank->add_option(
      "--criterion", a->criterion,
      "shortest (default: shortest mean width among methods whose worst coverage stays at or above "
      "nominal - tolerance), closest (smallest RMS deviation from nominal) or safest (largest worst "
      "coverage)");
  rank->add_option("--tolerance", a->tolerance,
                   "with shortest: the coverage gate is nominal - tolerance (default 0)");
  rank->add_option("--bands", a->bands,
                   "n bands A:B,C:D,... (default: three bands of equally many n values)");
  rank->add_option("--format", a->format, "text (default) or csv");
  rank->add_flag("--no-pairs", a->no_pairs,
                 "skip the paired Monte Carlo differences of simulated-only cubes");
  return {rank, [a](std::ostream& out, std::ostream&) { return cmd_rank(*a, out); }};
}

}  // namespace covergrid::cli
