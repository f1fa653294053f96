#include "covergrid/output/tables.hpp"

#include "covergrid/engine/coverage_rule.hpp"
#include "covergrid/engine/error.hpp"
#include "covergrid/engine/output_location.hpp"
#include "covergrid/output/rank.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cerrno>
#include <cstring>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <limits>
#include <optional>

namespace covergrid::output {

namespace fs = std::filesystem;

const char* const ranking_order_text =
    "Order: the methods whose worst coverage meets nominal (within 1e-10, the numerical slack every "
    "command shares) come first, shortest mean width first; the others follow, largest worst coverage "
    "first. This is `covergrid rank --criterion shortest` over the whole n range as one band.";

const char* const coverage_caution =
    "Coverage is a long-run property of a procedure: the share of intervals, over repeated "
    "samples at a fixed true p, that contain p. It says nothing about whether one computed "
    "interval contains the truth. A method choice for regulated or clinical work follows the "
    "applicable guidance and a qualified statistician's review.";

void write_text_atomically(const std::string& path, const std::string& text) {
  if (const std::string problem = engine::output_location_problem(path); !problem.empty())
    throw InputError(path, problem);
  const std::string temp = path + ".partial";
  {
    std::ofstream out(temp, std::ios::binary | std::ios::trunc);
    if (!out) throw InputError(temp, std::string("cannot write: ") + std::strerror(errno));
    out << text;
    if (!out.flush()) {
      const int e = errno;
      out.close();
      std::error_code ignored;
      fs::remove(temp, ignored);
      throw InputError(temp, std::string("cannot write: ") + std::strerror(e));
    }
  }
  std::error_code ec;
  fs::rename(temp, path, ec);
  if (ec) {
    std::error_code ignored;
    fs::remove(temp, ignored);
    throw InputError(path, "cannot rename the finished file into place: " + ec.message());
  }
}

std::string csv_number(double v) { return std::isfinite(v) ? fmt::format("{}", v) : std::string(); }

std::string wrap_text(const std::string& text, std::size_t width) {
  std::string out, line;
  std::size_t start = 0;
  while (start < text.size()) {
    std::size_t end = text.find(' ', start);
    if (end == std::string::npos) end = text.size();
    const std::string word = text.substr(start, end - start);
    if (!line.empty() && line.size() + 1 + word.size() > width) {
      out += line;
      out += '\n';
      line.clear();
    }
    if (!line.empty()) line += ' ';
    line += word;
    start = end + 1;
  }
  if (!line.empty()) {
    out += line;
    out += '\n';
  }
  return out;
}

namespace {

constexpr double nan = std::numeric_limits<double>::quiet_NaN();

std::string num(double v, int digits = 6) {
  if (std::isnan(v)) return "";
  return fmt::format("{:.{}g}", v, digits);
}

std::string pct(double v) {
  if (std::isnan(v)) return "-";
  return fmt::format("{:.2f}", 100 * v);
}

/// The ranking row's trailing note: below nominal, simulated only.
std::string row_note(const RankingRow& r) {
  std::string note = r.meets_nominal ? "" : "below nominal";
  if (r.simulated) note += note.empty() ? "simulated only" : ", simulated only";
  return note;
}

}  // namespace

namespace {

/// The summary figures a ranking row reads: exact or simulated.
struct RankingFigures {
  std::vector<double> inf, cont, rms, below, width;
  RankingFigures(const CubeReader& cube, bool exact)
      : inf(cube.summary(exact ? "inf_coverage" : "mc_min_coverage")),
        cont(cube.summary(exact ? "mean_coverage_continuous" : "mc_mean_coverage")),
        rms(cube.summary(exact ? "rms_deviation" : "mc_rms_deviation")),
        below(cube.summary(exact ? "share_below" : "mc_share_below")),
        width(cube.summary(exact ? "mean_width" : "mc_mean_width")) {}
};

/// The row of (model, side, level, method) from `f`, or none when some n
/// has no figure.
std::optional<RankingRow> ranking_row(const CubeReader& cube, const RankingFigures& f, std::size_t mo,
                                      std::size_t s, std::size_t l, std::size_t m) {
  RankingRow r{mo, s, l, m};
  r.worst_inf = std::numeric_limits<double>::infinity();
  double k = 0;
  for (std::size_t i = 0; i < cube.n.size(); ++i) {
    const std::size_t at = cube.summary_index(mo, s, l, m, i);
    if (std::isnan(f.inf[at])) return std::nullopt;
    if (f.inf[at] < r.worst_inf) {
      r.worst_inf = f.inf[at];
      r.worst_inf_n = cube.n[i];
    }
    r.mean_coverage += f.cont[at];
    r.rms_deviation += f.rms[at];
    r.share_below += f.below[at];
    r.mean_width += f.width[at];
    ++k;
  }
  if (k == 0) return std::nullopt;
  r.mean_coverage /= k;
  r.rms_deviation /= k;
  r.share_below /= k;
  r.mean_width /= k;
  r.meets_nominal = engine::meets_coverage(r.worst_inf, cube.levels[l]);
  return r;
}

void rank_group(std::vector<RankingRow>& group) {
  std::stable_sort(group.begin(), group.end(), [](const RankingRow& a, const RankingRow& b) {
    return ranks_before(RankCriterion::shortest,
                        {a.meets_nominal, a.worst_inf, a.mean_width, a.rms_deviation},
                        {b.meets_nominal, b.worst_inf, b.mean_width, b.rms_deviation});
  });
}

}  // namespace

std::vector<RankingRow> ranking(const CubeReader& cube) {
  // Exact figures where the cube has them; otherwise the simulated grid ones.
  const bool ex = cube.has_exact();
  const RankingFigures figures(cube, ex);
  std::optional<RankingFigures> simulated;
  if (ex && cube.has_mc()) simulated.emplace(cube, false);
  std::vector<RankingRow> out;
  for (std::size_t mo = 0; mo < cube.models.size(); ++mo)
    for (std::size_t s = 0; s < cube.sides.size(); ++s)
      for (std::size_t l = 0; l < cube.levels.size(); ++l) {
        std::vector<RankingRow> group, only_simulated;
        for (std::size_t m = 0; m < cube.methods.size(); ++m) {
          if (auto r = ranking_row(cube, figures, mo, s, l, m)) {
            group.push_back(*r);
          } else if (simulated) {
            if (auto q = ranking_row(cube, *simulated, mo, s, l, m)) {
              q->simulated = true;
              only_simulated.push_back(*q);
            }
          }
        }
        rank_group(group);
        rank_group(only_simulated);
        group.insert(group.end(), only_simulated.begin(), only_simulated.end());
        for (std::size_t i = 0; i < group.size(); ++i) group[i].rank = static_cast<int>(i) + 1;
        out.insert(out.end(), group.begin(), group.end());
      }
  return out;
}

std::vector<std::string> write_tables(const CubeReader& cube, const std::string& prefix) {
  std::vector<std::string> stats;
  if (cube.has_exact())
    stats = {"mean_coverage",
             "min_coverage",
             "min_coverage_p",
             "inf_coverage",
             "inf_coverage_p",
             "inf_coverage_from",
             "mean_coverage_continuous",
             "rms_deviation",
             "share_below",
             "mean_width",
             "mean_miss_low",
             "mean_miss_high"};
  if (cube.has_mc())
    for (const char* name : {"mean_coverage", "min_coverage", "min_coverage_p", "rms_deviation",
                             "share_below", "mean_width", "mean_miss_low", "mean_miss_high"})
      stats.push_back(std::string("mc_") + name);
  std::vector<std::vector<double>> values;
  for (const auto& name : stats) values.push_back(cube.summary(name));
  // A row where the method has figures: its side defined, and exact cells
  // unless it needs the cluster counts (then simulated ones only).
  std::vector<std::size_t> defined;
  for (std::size_t k = 0; k < stats.size(); ++k)
    if (stats[k] == "min_coverage" || stats[k] == "mc_min_coverage") defined.push_back(k);

  std::string csv = "model,side,level,method,n";
  for (const auto& name : stats) csv += "," + name;
  csv += '\n';
  for (std::size_t mo = 0; mo < cube.models.size(); ++mo)
    for (std::size_t s = 0; s < cube.sides.size(); ++s)
      for (std::size_t l = 0; l < cube.levels.size(); ++l)
        for (std::size_t m = 0; m < cube.methods.size(); ++m)
          for (std::size_t i = 0; i < cube.n.size(); ++i) {
            const std::size_t at = cube.summary_index(mo, s, l, m, i);
            if (std::all_of(defined.begin(), defined.end(),
                            [&](std::size_t k) { return std::isnan(values[k][at]); }))
              continue;  // side not defined by the method
            csv += fmt::format("{},{},{},\"{}\",{}", cube.models[mo], cube.sides[s], cube.levels[l],
                               cube.methods[m], cube.n[i]);
            for (const auto& v : values) {
              csv += ',';
              csv += csv_number(v[at]);
            }
            csv += '\n';
          }

  const auto rank = ranking(cube);
  std::string rcsv =
      "model,side,level,rank,method,worst_inf_coverage,worst_at_n,mean_coverage_continuous,"
      "mean_rms_deviation,mean_share_below,mean_width,basis\n";
  for (const auto& r : rank)
    rcsv += fmt::format("{},{},{},{},\"{}\",{},{},{},{},{},{},{}\n", cube.models[r.model], cube.sides[r.side],
                        csv_number(cube.levels[r.level]), r.rank, cube.methods[r.method],
                        csv_number(r.worst_inf), r.worst_inf_n, csv_number(r.mean_coverage),
                        csv_number(r.rms_deviation), csv_number(r.share_below), csv_number(r.mean_width),
                        cube.has_exact() && !r.simulated ? "exact" : "simulated");

  std::string md =
      fmt::format("# {}\n\n", cube.attr("title").empty() ? "covergrid results" : cube.attr("title"));
  md += fmt::format("Cube `{}`, scenario checksum `{}`, covergrid {}.\n\n",
                    fs::path(cube.path()).filename().string(), cube.attr("scenario_sha256").substr(0, 16),
                    cube.attr("tool_version"));
  md += fmt::format(
      "p range [{}, {}] ({} grid points), n from {} to {} ({} values). {}\n\n", cube.p.front(), cube.p.back(),
      cube.p.size(), cube.n.front(), cube.n.back(), cube.n.size(),
      cube.has_exact()
          ? "Coverage figures are exact (binomial enumeration)."
          : "Coverage figures are Monte Carlo estimates (see the cube's /mc group for standard errors).");
  md += std::string("> ") + coverage_caution + "\n\n";
  md += "## Standing of the methods over the whole n range\n\n" +
        ranking_footnote(cube.has_exact(), has_simulated_rows(rank)) + "\n";
  for (std::size_t mo = 0; mo < cube.models.size(); ++mo)
    for (std::size_t s = 0; s < cube.sides.size(); ++s)
      for (std::size_t l = 0; l < cube.levels.size(); ++l) {
        md += fmt::format("\n### {} model, {}, nominal {}%\n\n", cube.models[mo], cube.sides[s],
                          num(100 * cube.levels[l]));
        md +=
            "| # | method | worst (%) | at n | mean coverage (%) | RMS dev. (pts) | p below nominal (%) | "
            "mean width | |\n"
            "|---:|---|---:|---:|---:|---:|---:|---:|---|\n";
        for (const auto& r : rank)
          if (r.model == mo && r.side == s && r.level == l)
            md += fmt::format("| {} | {} | {} | {} | {} | {} | {} | {:.4f} | {} |\n", r.rank,
                              cube.methods[r.method], pct(r.worst_inf), r.worst_inf_n, pct(r.mean_coverage),
                              pct(r.rms_deviation), pct(r.share_below), r.mean_width, row_note(r));
      }
  md += "\nPer-n figures are in the CSV summary beside this file.\n";

  std::vector<std::string> paths = {prefix + "-summary.csv", prefix + "-ranking.csv", prefix + "-summary.md"};
  write_text_atomically(paths[0], csv);
  write_text_atomically(paths[1], rcsv);
  write_text_atomically(paths[2], md);
  return paths;
}

bool has_simulated_rows(const std::vector<RankingRow>& rows) {
  return std::any_of(rows.begin(), rows.end(), [](const RankingRow& r) { return r.simulated; });
}

std::string ranking_footnote(bool exact, bool simulated_rows) {
  std::string s = std::string(ranking_order_text) + " Columns: # = rank in that order; ";
  if (exact)
    s += "worst % = smallest exact infimum of coverage over the continuous p range, at any n; at n = the n "
         "where it occurs; mean % = exact mean coverage over the p range (uniform p), averaged over n; ";
  else
    s += "worst % = smallest simulated coverage on the p grid, at any n (Monte Carlo estimate); at n = the n "
         "where it occurs; mean % = mean simulated coverage over the p grid, averaged over n; ";
  s += "RMS pts = root-mean-square deviation of grid coverage from nominal, in percentage points, averaged "
       "over n; below % = share of the grid's p where coverage is below nominal, averaged over n; width = "
       "expected interval width (clipped to [0, 1]), averaged over the grid's p and n; \"below nominal\" "
       "marks a method whose worst coverage falls below nominal.";
  if (exact && simulated_rows)
    s +=
        " \"Simulated only\" marks a method with no exact figures (a design-effect method in clustered "
        "samples needs each cluster's count, which only simulation draws): such methods follow the others, "
        "ranked among themselves on their Monte Carlo figures, worst % being the smallest simulated coverage "
        "on the p grid.";
  return s;
}

std::string headline(const CubeReader& cube) {
  const auto rank = ranking(cube);
  std::size_t width = 6;
  for (const auto& m : cube.methods) width = std::max(width, m.size());
  std::string out;
  for (std::size_t mo = 0; mo < cube.models.size(); ++mo)
    for (std::size_t s = 0; s < cube.sides.size(); ++s)
      for (std::size_t l = 0; l < cube.levels.size(); ++l) {
        out += fmt::format("\n{} model, {}, nominal {}%, n {}..{}, p {}..{}\n", cube.models[mo],
                           cube.sides[s], num(100 * cube.levels[l]), cube.n.front(), cube.n.back(),
                           cube.p.front(), cube.p.back());
        out += fmt::format("  {:>2}  {:<{}}  {:>9}  {:>6}  {:>9}  {:>8}  {:>8}  {:>9}\n", "#", "method",
                           width, "worst %", "at n", "mean %", "RMS pts", "below %", "width");
        for (const auto& r : rank)
          if (r.model == mo && r.side == s && r.level == l)
            out += fmt::format("  {:>2}  {:<{}}  {:>9}  {:>6}  {:>9}  {:>8}  {:>8}  {:>9.4f}{}\n", r.rank,
                               cube.methods[r.method], width, pct(r.worst_inf), r.worst_inf_n,
                               pct(r.mean_coverage), pct(r.rms_deviation), pct(r.share_below), r.mean_width,
                               row_note(r).empty() ? "" : "  " + row_note(r));
      }
  out += '\n';
  out += wrap_text(ranking_footnote(cube.has_exact(), has_simulated_rows(rank)), 100);
  out += '\n';
  out += wrap_text(coverage_caution, 100);
  return out;
}

}  // namespace covergrid::output
