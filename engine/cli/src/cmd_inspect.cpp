// covergrid inspect: what a cube holds, its headline, and paired Monte Carlo
// differences of two methods.
#include "commands.hpp"
#include "covergrid/engine/interval_table.hpp"
#include "covergrid/engine/monte_carlo.hpp"
#include "covergrid/output/cube.hpp"
#include "covergrid/output/tables.hpp"
#include "covergrid/scenarios/loader.hpp"

#include <fmt/format.h>

#include <filesystem>
#include <cmath>
#include <memory>
#include <sstream>

namespace covergrid::cli {

namespace {

int cmd_inspect(const std::string& path, std::ostream& out) {
  output::CubeReader cube(path);
  // Every chunk of every dataset is read, so a damaged one is refused (exit
  // 2) before anything is printed.
  const std::size_t datasets = cube.verify();
  out << fmt::format("{}\n  format {} version {}, written by covergrid {} at {}\n", path, cube.attr("format"),
                     cube.attr("format_version"), cube.attr("tool_version"), cube.attr("created_utc"));
  out << fmt::format("  title: {}\n  scenario sha256: {}\n  seed: {}  shard: {}  complete: {}\n",
                     cube.attr("title"), cube.attr("scenario_sha256"), cube.attr("seed"), cube.attr("shard"),
                     cube.complete() ? "yes" : "no");
  out << fmt::format("  axes: model {} x side {} x level {} x method {} x n {} ({}..{}) x p {} ({}..{})\n",
                     cube.models.size(), cube.sides.size(), cube.levels.size(), cube.methods.size(),
                     cube.n.size(), cube.n.front(), cube.n.back(), cube.p.size(), cube.p.front(),
                     cube.p.back());
  out << "  methods:";
  for (const auto& m : cube.methods) out << ' ' << m;
  out << '\n';
  out << fmt::format(
      "  checksums: every chunk of all {} datasets verified (Fletcher-32; string axes by their copies)\n",
      datasets);
  out << fmt::format("  sources: {}\n", cube.has_exact() && cube.has_mc() ? "exact and Monte Carlo"
                                        : cube.has_exact()                ? "exact"
                                                                          : "Monte Carlo");
  if (!cube.complete()) {
    out << "  the cube is not complete: its summaries are partial\n";
    return exit_ok;
  }
  if (cube.is_shard()) {
    out << fmt::format(
        "  shard {} of a scenario: it holds only its chunks; join the shards with\n"
        "  covergrid merge for the whole cube and its summaries\n",
        cube.shard());
    return exit_ok;
  }
  out << output::headline(cube);
  return exit_ok;
}

/// Paired Monte Carlo differences of two methods' coverage, re-drawn from
/// the cube's own scenario and seed (the streams are counter-based, so the
/// draws are exactly the run's; the marginal coverages are checked against
/// the cube bit for bit).
int cmd_pair(const std::string& path, const std::string& pair, bool csv, std::ostream& final_out) {
  // Written to standard output only when all of it is computed: a damaged
  // cube found part-way gives its one-line refusal and no partial table.
  std::ostringstream out;
  const auto comma = pair.find(',');
  if (comma == std::string::npos || comma == 0 || comma + 1 == pair.size())
    throw InputError("--pair", "give two method labels separated by a comma, e.g. --pair wilson,wald");
  const std::string label_a = pair.substr(0, comma), label_b = pair.substr(comma + 1);
  output::CubeReader cube(path);  // validates the layout, the replicate counts among it
  cube.require_whole();
  cube.verify();  // every chunk's checksum and range before anything is printed
  if (!cube.has_mc())
    throw InputError(path, "holds no Monte Carlo results (the scenario had replicates = 0)");
  const engine::Scenario s =
      // Files its scenario names (a table's) resolve against the cube's folder.
      scenarios::load_scenario_text(cube.attr("scenario"), path + " (its scenario)",
                                    std::filesystem::path(path).parent_path().string(), false);
  if (s.sha256 != cube.attr("scenario_sha256"))
    throw InputError(path, "its stored scenario does not match its checksum");
  // The loops below index the cube by the scenario's grid.
  if (s.n != std::vector<int>(cube.n.begin(), cube.n.end()) || s.p != cube.p || s.levels != cube.levels ||
      s.sides.size() != cube.sides.size() || s.methods.size() != cube.methods.size() ||
      s.models.size() != cube.models.size())
    throw InputError(path, "is damaged: its stored scenario's grid does not match its axes (/summary)");
  auto find = [&](const std::string& label) {
    for (std::size_t m = 0; m < s.methods.size(); ++m)
      if (s.methods[m].label == label) return m;
    std::string labels;
    for (const auto& m : s.methods) labels += (labels.empty() ? "" : ", ") + m.label;
    throw InputError("--pair",
                     fmt::format("no method labelled '{}' in {} (labels: {})", label, path, labels));
  };
  const std::size_t ia = find(label_a), ib = find(label_b);
  if (csv) out << "model,side,level,n,p,replicates,coverage_a,coverage_b,difference,difference_se\n";
  for (std::size_t model = 0; model < s.models.size(); ++model)
    for (std::size_t side = 0; side < s.sides.size(); ++side) {
      if (!s.methods[ia].method->supports(s.sides[side]) || !s.methods[ib].method->supports(s.sides[side]))
        continue;
      for (std::size_t level = 0; level < s.levels.size(); ++level) {
        if (!csv)
          out << fmt::format(
              "\n{} model, {}, nominal {:g}%: coverage of {} minus {} (paired, same draws)\n"
              "  {:>6}  {:>10}  {:>10}  {:>10}  {:>12}\n",
              s.models[model].label, methods::side_name(s.sides[side]), 100 * s.levels[level], label_a,
              label_b, "n", "mean diff", "min diff", "max diff", "max |diff|/se");
        for (std::size_t ni = 0; ni < s.n.size(); ++ni) {
          const int n = s.n[ni];
          const auto& sampling = *s.models[model].model;
          const auto ta = engine::build_table(*s.methods[ia].method, n, s.levels[level], s.sides[side],
                                              s.methods[ia].label, sampling.design());
          const auto tb = engine::build_table(*s.methods[ib].method, n, s.levels[level], s.sides[side],
                                              s.methods[ib].label, sampling.design());
          const auto reps = cube.mc_replicates(model, ni);
          const auto stored_a = cube.mc_row("coverage", model, side, level, ia, ni);
          double sum = 0, lo = HUGE_VAL, hi = -HUGE_VAL, zmax = 0;
          for (std::size_t pi = 0; pi < s.p.size(); ++pi) {
            // As the stored scenario implies (its fixed count, or within its
            // adaptive range): the re-draw loops over every replicate, so a
            // damaged count (10^10) would keep it busy for hours.
            const double want_lo = static_cast<double>(s.replicates),
                         want_hi = static_cast<double>(s.target_se > 0 ? s.max_replicates : s.replicates);
            if (!(reps[pi] >= want_lo && reps[pi] <= want_hi))
              throw InputError(
                  path,
                  fmt::format("is damaged: dataset /mc/replicates holds {} at n = {}, p = {}, "
                              "where its scenario asks for {}",
                              reps[pi], n, s.p[pi],
                              want_lo == want_hi ? fmt::format("{}", s.replicates)
                                                 : fmt::format("{} to {}", s.replicates, s.max_replicates)));
            if (!(reps[pi] >= 0 && reps[pi] <= output::cube_replicates_limit))
              throw InputError(
                  path, fmt::format("is damaged: dataset /mc/replicates holds {} at n = {}, p = {}", reps[pi],
                                    n, s.p[pi]));
            const auto c = engine::paired_difference(s.seed, model, n, pi, sampling.attainable(s.p[pi]),
                                                     static_cast<std::uint64_t>(reps[pi]), ta, tb,
                                                     *s.models[model].model);
            // The draws are the run's own, so a difference means the stored
            // value was changed after the run: damage or alteration.
            if (c.coverage_a != stored_a[pi])
              throw InputError(path,
                               fmt::format("is damaged or altered: dataset /mc/coverage holds {} for {} "
                                           "at n = {}, p = {}, but the run's own draws give {}",
                                           stored_a[pi], label_a, n, s.p[pi], c.coverage_a));
            if (csv)
              out << fmt::format("{},{},{},{},{},{},{},{},{},{}\n", s.models[model].label,
                                 methods::side_name(s.sides[side]), output::csv_number(s.levels[level]), n,
                                 output::csv_number(s.p[pi]), c.replicates, output::csv_number(c.coverage_a),
                                 output::csv_number(c.coverage_b), output::csv_number(c.difference),
                                 output::csv_number(c.difference_se));
            sum += c.difference;
            lo = std::min(lo, c.difference);
            hi = std::max(hi, c.difference);
            if (c.difference_se > 0) zmax = std::max(zmax, std::fabs(c.difference) / c.difference_se);
          }
          if (!csv)
            out << fmt::format("  {:>6}  {:>+10.5f}  {:>+10.5f}  {:>+10.5f}  {:>12.1f}\n", n,
                               sum / static_cast<double>(s.p.size()), lo, hi, zmax);
        }
      }
    }
  if (!csv)
    out << "\nThe standard error of each difference comes from the discordant replicates (one method "
           "covers,\n"
           "the other does not); --csv gives every (n, p).\n";
  final_out << out.str();
  return exit_ok;
}

struct InspectArgs {
  std::string cube, pair;
  bool csv = false;
};

}  // namespace

Command add_inspect_command(CLI::App& app) {
  auto a = std::make_shared<InspectArgs>();
  auto* inspect = app.add_subcommand("inspect", "What a cube holds and its headline figures");
  inspect->add_option("CUBE", a->cube, "cube file (.h5)")->required();
  inspect->add_option("--pair", a->pair, "A,B: paired Monte Carlo differences of two methods' coverage");
  inspect->add_flag("--csv", a->csv, "with --pair: one CSV row per (model, side, level, n, p)");
  return {inspect, [a](std::ostream& out, std::ostream&) {
            return a->pair.empty() ? cmd_inspect(a->cube, out) : cmd_pair(a->cube, a->pair, a->csv, out);
          }};
}

}  // namespace covergrid::cli
