#include "covergrid/output/rank.hpp"

#include "covergrid/engine/coverage_rule.hpp"
#include "covergrid/engine/error.hpp"
#include "covergrid/engine/interval_table.hpp"
#include "covergrid/engine/monte_carlo.hpp"
#include "covergrid/methods/registry.hpp"
#include "covergrid/output/tables.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>
#include <cstdlib>
#include <limits>
#include <optional>

namespace covergrid::output {

const char* criterion_name(RankCriterion c) {
  switch (c) {
    case RankCriterion::shortest:
      return "shortest";
    case RankCriterion::closest:
      return "closest";
    case RankCriterion::safest:
      return "safest";
  }
  return "?";
}

bool ranks_before(RankCriterion c, const RankStanding& a, const RankStanding& b) {
  switch (c) {
    case RankCriterion::shortest:
      if (a.eligible != b.eligible) return a.eligible;
      return a.eligible ? a.mean_width < b.mean_width : a.worst_coverage > b.worst_coverage;
    case RankCriterion::closest:
      return a.rms_deviation < b.rms_deviation;
    case RankCriterion::safest:
      return a.worst_coverage > b.worst_coverage;
  }
  return false;
}

std::string criterion_text(RankCriterion c, double tolerance, bool simulated) {
  const char* worst = simulated ? "smallest simulated coverage on the grid" : "exact infimum of coverage";
  switch (c) {
    case RankCriterion::shortest:
      return fmt::format(
          "shortest mean width among the methods whose {} meets {} (within {:g}, the numerical slack "
          "every command shares); the others follow, by worst coverage",
          worst, engine::threshold_words(tolerance), engine::coverage_decision_slack);
    case RankCriterion::closest:
      return "smallest mean RMS deviation of coverage from nominal over the grid's p";
    case RankCriterion::safest:
      return fmt::format("largest worst-case coverage ({})", worst);
  }
  return "";
}

namespace {

/// A method instance rebuilt from the cube's /methods/<label> attributes.
/// Parameter values from a cube group's param.<name> text attributes.
methods::ParamValues params_from_attributes(const std::vector<methods::ParamSpec>& specs,
                                            const std::map<std::string, std::string>& info) {
  methods::ParamValues given;
  for (const auto& spec : specs) {
    const auto it = info.find(fmt::format("param.{}", spec.name));
    if (it == info.end()) continue;
    if (spec.kind == methods::ParamSpec::Kind::boolean)
      given[spec.name] = it->second == "true";
    else if (spec.kind == methods::ParamSpec::Kind::number)
      given[spec.name] = std::strtod(it->second.c_str(), nullptr);
    else
      given[spec.name] = it->second;
  }
  return given;
}

methods::MethodInstance instance_from_cube(const CubeReader& cube, const std::string& label) {
  const auto& info = cube.method_info.at(label);
  const methods::MethodEntry* entry = methods::find_method(info.at("id"));
  if (!entry)
    throw InputError(cube.path(), fmt::format("method {} is not known to this version", info.at("id")));
  return methods::make_instance(entry->info.id, params_from_attributes(entry->info.params, info), label);
}

/// The sampling model of the cube's model axis entry `index`, from its
/// /models group (binomial for cubes written before it existed).
std::shared_ptr<const engine::SamplingModel> model_from_cube(const CubeReader& cube, std::size_t index) {
  const auto it = cube.model_info.find(cube.models.at(index));
  if (it == cube.model_info.end()) return engine::binomial_model_ptr();
  const auto& info = it->second;
  const engine::ModelEntry* entry = engine::find_model(info.at("kind"));
  if (!entry)
    throw InputError(cube.path(), fmt::format("model {} is not known to this version", info.at("kind")));
  try {
    return entry->make(methods::resolve_param_list(fmt::format("model '{}'", entry->kind), entry->params,
                                                   params_from_attributes(entry->params, info)));
  } catch (const methods::ParameterError& e) {
    throw InputError(cube.path(), fmt::format("group /models/{}: {}", cube.models.at(index), e.what()));
  }
}

}  // namespace

std::vector<RankGroup> rank_methods(const CubeReader& cube, const RankOptions& options) {
  if (!cube.complete()) throw InputError(cube.path(), "is not complete: finish its run first");
  const bool ex = cube.has_exact();
  // The figures ranked: exact where the cube has them, else simulated; a
  // method with no exact figures in a cube that has both (a design-effect
  // method in clustered samples) is ranked on its simulated ones after the
  // others (RankEntry::simulated).
  struct Figures {
    std::vector<double> worst, mean, rms, width;
  };
  auto figures = [&](bool exact) {
    return Figures{cube.summary(exact ? "inf_coverage" : "mc_min_coverage"),
                   cube.summary(exact ? "mean_coverage_continuous" : "mc_mean_coverage"),
                   cube.summary(exact ? "rms_deviation" : "mc_rms_deviation"),
                   cube.summary(exact ? "mean_width" : "mc_mean_width")};
  };
  const Figures main = figures(ex);
  const std::optional<Figures> simulated =
      ex && cube.has_mc() ? std::optional<Figures>(figures(false)) : std::nullopt;
  std::vector<std::pair<std::int64_t, std::int64_t>> bands = options.bands;
  if (bands.empty()) {
    const std::size_t k = std::min<std::size_t>(3, cube.n.size());
    for (std::size_t b = 0; b < k; ++b) {
      const std::size_t first = b * cube.n.size() / k, last = (b + 1) * cube.n.size() / k - 1;
      bands.emplace_back(cube.n[first], cube.n[last]);
    }
  }
  std::uint64_t seed = 0;
  if (!ex) seed = std::strtoull(cube.attr("seed").c_str(), nullptr, 10);
  std::vector<RankGroup> out;
  for (std::size_t mo = 0; mo < cube.models.size(); ++mo)
    for (std::size_t s = 0; s < cube.sides.size(); ++s)
      for (std::size_t l = 0; l < cube.levels.size(); ++l)
        for (const auto& [lo, hi] : bands) {
          RankGroup g{mo, s, l, lo, hi, 0, !ex, {}};
          std::vector<std::size_t> ns;
          for (std::size_t i = 0; i < cube.n.size(); ++i)
            if (cube.n[i] >= lo && cube.n[i] <= hi) ns.push_back(i);
          if (ns.empty())
            throw InputError("--bands", fmt::format("the band {}..{} holds none of the cube's n", lo, hi));
          g.n_count = ns.size();
          const double threshold = cube.levels[l] - options.tolerance;
          auto entry = [&](std::size_t m, const Figures& f) -> std::optional<RankEntry> {
            RankEntry e;
            e.method = m;
            e.worst_coverage = std::numeric_limits<double>::infinity();
            for (std::size_t i : ns) {
              const std::size_t at = cube.summary_index(mo, s, l, m, i);
              if (std::isnan(f.worst[at])) return std::nullopt;  // the method does not define this side
              if (f.worst[at] < e.worst_coverage) {
                e.worst_coverage = f.worst[at];
                e.worst_n = cube.n[i];
              }
              e.mean_coverage += f.mean[at];
              e.rms_deviation += f.rms[at];
              e.mean_width += f.width[at];
            }
            const double k = static_cast<double>(ns.size());
            e.mean_coverage /= k;
            e.rms_deviation /= k;
            e.mean_width /= k;
            e.eligible = engine::meets_coverage(e.worst_coverage, threshold);
            return e;
          };
          std::vector<RankEntry> only_simulated;
          for (std::size_t m = 0; m < cube.methods.size(); ++m) {
            if (auto e = entry(m, main)) {
              g.entries.push_back(*e);
            } else if (simulated) {
              if (auto q = entry(m, *simulated)) {
                q->simulated = true;
                only_simulated.push_back(*q);
              }
            }
          }
          auto order = [&](const RankEntry& a, const RankEntry& b) {
            return ranks_before(options.criterion,
                                {a.eligible, a.worst_coverage, a.mean_width, a.rms_deviation},
                                {b.eligible, b.worst_coverage, b.mean_width, b.rms_deviation});
          };
          std::stable_sort(g.entries.begin(), g.entries.end(), order);
          std::stable_sort(only_simulated.begin(), only_simulated.end(), order);
          g.entries.insert(g.entries.end(), only_simulated.begin(), only_simulated.end());
          for (std::size_t i = 0; i < g.entries.size(); ++i) g.entries[i].rank = static_cast<int>(i) + 1;
          // Paired differences against the first method, on the run's own draws.
          if (!ex && options.paired && g.entries.size() > 1) {
            methods::Side side{};
            if (!methods::parse_side(cube.sides[s], side))
              throw InputError(cube.path(), fmt::format("unknown side {}", cube.sides[s]));
            const auto sampling = model_from_cube(cube, mo);
            const auto leader = instance_from_cube(cube, cube.methods[g.entries[0].method]);
            for (std::size_t r = 1; r < g.entries.size(); ++r) {
              const auto other = instance_from_cube(cube, cube.methods[g.entries[r].method]);
              double sum = 0, var = 0, cells = 0;
              for (std::size_t i : ns) {
                const int n = static_cast<int>(cube.n[i]);
                const auto ta = engine::build_table(*other.method, n, cube.levels[l], side, other.label,
                                                    sampling->design());
                const auto tb = engine::build_table(*leader.method, n, cube.levels[l], side, leader.label,
                                                    sampling->design());
                const auto reps = cube.mc_replicates(mo, i);
                for (std::size_t pi = 0; pi < cube.p.size(); ++pi) {
                  const auto c =
                      engine::paired_difference(seed, mo, n, pi, sampling->attainable(cube.p[pi]),
                                                static_cast<std::uint64_t>(reps[pi]), ta, tb, *sampling);
                  sum += c.difference;
                  var += c.difference_se * c.difference_se;
                  ++cells;
                }
              }
              g.entries[r].has_pair = true;
              g.entries[r].pair_difference = sum / cells;
              g.entries[r].pair_se = std::sqrt(var) / cells;
            }
          }
          out.push_back(std::move(g));
        }
  return out;
}

std::string rank_text(const CubeReader& cube, const std::vector<RankGroup>& groups,
                      const RankOptions& options) {
  std::string s;
  std::size_t width = 6;
  for (const auto& m : cube.methods) width = std::max(width, m.size());
  const bool simulated = !groups.empty() && groups.front().simulated;
  s += wrap_text(
      fmt::format("Criterion: {}.", criterion_text(options.criterion, options.tolerance, simulated)), 100);
  const std::string below_mark = fmt::format("[below {}] ", engine::threshold_words(options.tolerance));
  for (const auto& g : groups) {
    s += fmt::format("\n{} model, {}, nominal {:g} %, n = {}..{} ({} values){}\n", cube.models[g.model],
                     cube.sides[g.side], 100 * cube.levels[g.level], g.n_lo, g.n_hi, g.n_count,
                     g.simulated ? ", simulated" : "");
    s += fmt::format("  {:>4}  {:<{}}  {:>10}  {:>7}  {:>10}  {:>10}  {:>10}  {}\n", "rank", "method", width,
                     "worst cov", "at n", "mean cov", "rms dev", "mean width",
                     g.simulated ? "coverage vs first (paired)" : "");
    for (const auto& e : g.entries) {
      std::string pair;
      if (e.simulated) pair = "[simulated only] ";
      if (e.has_pair) pair += fmt::format("{:+.5f} +/- {:.5f}", e.pair_difference, e.pair_se);
      s += fmt::format("  {:>4}  {:<{}}  {:>10.6f}  {:>7}  {:>10.6f}  {:>10.6f}  {:>10.6f}  {}{}\n", e.rank,
                       cube.methods[e.method], width, e.worst_coverage, e.worst_n, e.mean_coverage,
                       e.rms_deviation, e.mean_width, e.eligible ? "" : below_mark, pair);
    }
  }
  s += '\n';
  s += wrap_text(
      fmt::format("Columns: rank = order under the criterion; worst cov = {} at the band's worst n (at n); "
                  "mean cov = {}, averaged over the band's n; rms dev = root-mean-square deviation of grid "
                  "coverage from nominal, averaged over n; mean width = expected width (clipped limits), "
                  "averaged over the grid's p and the band's n; [below {}] marks a method whose worst "
                  "coverage falls below that threshold.",
                  simulated ? "the smallest simulated coverage on the p grid"
                            : "the exact infimum of coverage over the continuous p range",
                  simulated ? "mean simulated coverage over the p grid"
                            : "exact mean coverage over the p range (uniform p)",
                  engine::threshold_words(options.tolerance)),
      100);
  if (std::any_of(groups.begin(), groups.end(), [](const RankGroup& g) {
        return std::any_of(g.entries.begin(), g.entries.end(),
                           [](const RankEntry& e) { return e.simulated; });
      }))
    s += "\n" +
         wrap_text(
             "[simulated only] marks a method with no exact figures (a design-effect method in "
             "clustered samples needs each cluster's count, which only simulation draws): it "
             "follows the others, ranked among such methods on its Monte Carlo figures, worst cov being "
             "the smallest simulated coverage on the p grid.",
             100);
  if (simulated)
    s += "\nPaired differences re-draw the run's own samples (common random numbers); +/- is one standard "
         "error\n"
         "of the band's mean difference.\n";
  s += '\n';
  s += wrap_text(coverage_caution, 100);
  return s;
}

std::string rank_csv(const CubeReader& cube, const std::vector<RankGroup>& groups) {
  std::string s =
      "model,side,level,n_lo,n_hi,source,rank,method,eligible,worst_coverage,worst_n,mean_coverage,rms_"
      "deviation,"
      "mean_width,paired_difference,paired_se\n";
  for (const auto& g : groups)
    for (const auto& e : g.entries)
      s += fmt::format(
          "{},{},{},{},{},{},{},\"{}\",{},{},{},{},{},{},{},{}\n", cube.models[g.model], cube.sides[g.side],
          cube.levels[g.level], g.n_lo, g.n_hi, g.simulated || e.simulated ? "monte-carlo" : "exact", e.rank,
          cube.methods[e.method], e.eligible ? 1 : 0, csv_number(e.worst_coverage), e.worst_n,
          csv_number(e.mean_coverage), csv_number(e.rms_deviation), csv_number(e.mean_width),
          e.has_pair ? csv_number(e.pair_difference) : "", e.has_pair ? csv_number(e.pair_se) : "");
  return s;
}

}  // namespace covergrid::output
