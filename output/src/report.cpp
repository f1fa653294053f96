// The visual report of a cube: one self-contained HTML page (inline CSS and
// SVG; no scripts, fonts, images or links to anything outside the page), in
// markup that also parses as XHTML (every element closed, every text and
// attribute escaped). The page shows, per (model, side, level):
//   - coverage against p for the chosen n, one SVG of panels per method (at
//     most three panels a row, plot areas of at least 300 x 220 pixels), with
//     the nominal level (for a simulated cube a band of +-1.96 standard
//     errors around the estimate);
//   - a heat map per method of coverage minus nominal over (n, p), binned
//     down to at most max_bins x max_bins cells, each bin showing the
//     minimum coverage over its cells;
//   - expected width against p for the chosen n, all methods in one panel per n;
//   - mean width against worst-case coverage, one point per method, labels
//     placed by svg::place_labels, far-off methods (worst case below
//     nominal - 4 alpha) in a strip under a broken vertical axis;
//   - the summary statistics at the chosen n and the ranking over all n
//     (output::ranking());
// and, once, the cube's provenance (title, seed, versions, created time,
// SHA-256 of the cube file), the methods, the scenario text and the cautions.
//
// Data carried by the drawing (the contract tests/output/check_report.py
// holds the page to; numbers in exact() form: the shortest text that reads
// back as the same double):
//   - every curve is a <polyline class="series"> with data-kind ("coverage"
//     or "width"), data-source ("exact" or "mc"), data-model, data-side,
//     data-level, data-method (the cube's labels; data-level in exact form),
//     data-n, data-p-index (the positions on the cube's p axis of the points
//     drawn, in plot order; the axis itself is the data-p attribute of the
//     <td id="p-axis"> in the cube table, as data-n of <td id="n-axis"> is
//     the n axis) and data-values (the cube's values at those p, in the same
//     order); simulated coverage
//     curves add data-se (the cube's coverage_se at those p). Points whose
//     value is NaN are not drawn; when more than max_points remain, each run
//     of consecutive points keeps its lowest and highest value.
//   - every heat map is a <g class="heat-map"> with data-source, data-model,
//     data-side, data-level, data-method and data-p-bins ("lo:hi" p values
//     of each p bin, inclusive); each of its rows is a <g class="heat-row">
//     with data-n-range ("lo hi", inclusive n values) and data-values (the
//     minimum coverage over each bin's cells, one per p bin; "nan" when the
//     bin holds no value); the row's <rect class="kK"> elements each cover
//     the bins data-bins="a b" (inclusive) of colour class K.
//   - the colour classes are the <rect class="heat-key kK"> of the legend,
//     with data-lo and data-hi, the class edges of bin minimum minus nominal;
//     a bin is in the class whose lower edge it reaches and whose upper edge
//     it does not: an edge e <= 0 is reached when engine::meets_coverage(v,
//     nominal + e) (v >= nominal + e - slack; the legend's <svg> carries
//     data-slack), an edge e > 0 when v - nominal >= e.
//   - the trade-off points are <circle class="point"> with data-method,
//     data-x (mean width: the ranking's mean over n of the grid mean width),
//     data-y (the ranking's worst coverage), data-panel ("main", or "strip"
//     for a far-off method under the broken axis) and data-meets-nominal
//     ("yes"/"no" by engine::meets_coverage); their labels are
//     <text class="point-label"> with data-method and data-box ("x0 y0 x1
//     y1", the box the placement kept clear), the nominal line's label a
//     <text class="nominal-label"> with data-box; a broken axis is a
//     <g class="axis-break"> with data-threshold (nominal - 4 alpha),
//     data-y-main and data-y-strip (the two vertical ranges).
//   - numeric table cells carry data-value with the unrounded figure.
#include "covergrid/output/report.hpp"

#include "covergrid/engine/coverage_rule.hpp"
#include "covergrid/engine/error.hpp"
#include "covergrid/engine/sha256.hpp"
#include "covergrid/output/svg.hpp"
#include "covergrid/output/tables.hpp"
#include "covergrid/version.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <array>
#include <cerrno>
#include <cmath>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <limits>
#include <map>

namespace covergrid::output {

namespace fs = std::filesystem;
using svg::Attrs;
using svg::Axis;
using svg::Canvas;
using svg::escape;
using svg::exact;
using svg::px;

namespace {

constexpr double nan = std::numeric_limits<double>::quiet_NaN();
constexpr double inf = std::numeric_limits<double>::infinity();
constexpr double page_width = 1120;
constexpr std::size_t max_auto_n = 6;
// Coverage-against-p panels: at most three a row across the page, each plot
// area at least 300 x 220 pixels over coverage from nominal - 2 alpha to 1,
// so that the band nominal +- alpha where coverage oscillates is about 150
// pixels tall at every level (enough to read oscillations of a few tenths of
// alpha); deeper collapses leave the panel at its foot.
constexpr std::size_t max_panel_columns = 3;
constexpr double min_panel_h = 220;
constexpr double panel_floor_alphas = 2;
// Font size of the trade-off plot's labels (svg .point-label and
// .nominal-label), which their placement measures.
constexpr double label_font = 11;

/// A box as "x0 y0 x1 y1" in pixels (the data-box attribute of placed labels).
std::string box_text(const svg::Box& b) {
  return fmt::format("{} {} {} {}", px(b.x0), px(b.y0), px(b.x1), px(b.y1));
}

// Method colours: our own choice of eight, alternating dark and light and
// spread over blue, orange, teal, purple, olive and grey, so that pairs
// differ in lightness as well as hue; the intent is that they stay apart for
// red-green colour deficiencies and in greyscale print (a design choice, not
// checked with a colour-vision simulation). Beyond eight methods the colours
// repeat with dashed, then dotted lines; the coverage panels hold one curve
// each and stay solid.
constexpr std::array<const char*, 8> line_colours = {"#1b4f8f", "#e08b1f", "#2a9d8f", "#7d3c98",
                                                     "#8a8a1e", "#5f5f5f", "#73a8dc", "#b5562c"};
constexpr std::array<const char*, 3> line_dashes = {"", "7 3", "2 2.5"};

Attrs line_style(std::size_t i) {
  Attrs a = {{"stroke", line_colours[i % line_colours.size()]}};
  const char* dash = line_dashes[(i / line_colours.size()) % line_dashes.size()];
  if (*dash) a.emplace_back("stroke-dasharray", dash);
  return a;
}

// Heat-map colour classes of coverage minus nominal, in multiples of
// alpha = 1 - level (so that the classes mean the same at every level: -alpha
// is a miss rate twice the nominal one). Our own diverging scale: browns and
// oranges below nominal, near-white around it, blues above (blue against
// orange is the contrast that red-green colour deficiencies keep, common
// practice); the classes darken away from the centre, and the legend labels
// each with its range in percentage points, so print in grey stays readable.
constexpr std::array<double, 9> class_edges = {-inf, -4, -2, -1, -0.5, -0.2, 0.2, 0.5, inf};
constexpr std::array<const char*, 8> class_colours = {"#6b2a00", "#a8460c", "#d9742b", "#eda35f",
                                                      "#f6d3a8", "#f4f3ee", "#a9cbe3", "#3f7fb5"};
constexpr const char* no_value_colour = "#bdbdbd";
constexpr std::size_t no_value_class = class_colours.size();

struct ClassBounds {
  std::array<double, class_colours.size()> lo, hi;
};

ClassBounds class_bounds(double level) {
  const double alpha = 1 - level;
  ClassBounds b{};
  for (std::size_t k = 0; k < class_colours.size(); ++k) {
    b.lo[k] = std::isinf(class_edges[k]) ? class_edges[k] : class_edges[k] * alpha;
    b.hi[k] = std::isinf(class_edges[k + 1]) ? class_edges[k + 1] : class_edges[k + 1] * alpha;
  }
  return b;
}

/// See coverage_class() in report.hpp: the highest class whose lower edge
/// the figure reaches.
std::size_t heat_class(double coverage, double level, const ClassBounds& b) {
  if (std::isnan(coverage)) return no_value_class;
  std::size_t k = 0;
  for (std::size_t j = 1; j < class_colours.size(); ++j) {
    const double edge = b.lo[j];
    const bool reaches =
        edge <= 0 ? engine::meets_coverage(coverage, level + edge) : coverage - level >= edge;
    if (!reaches) break;
    k = j;
  }
  return k;
}

std::string pct(double v, int decimals = 2) {
  if (std::isnan(v)) return "–";
  return fmt::format("{:.{}f}", 100 * v, decimals);
}

std::string fixed(double v, int decimals) {
  if (std::isnan(v)) return "–";
  return fmt::format("{:.{}f}", v, decimals);
}

std::string level_text(double level) { return fmt::format("{:g} %", 100 * level); }

/// A signed number of percentage points for the legend (U+2212 for minus).
std::string points_text(double v) {
  const std::string s = fmt::format("{:g}", std::fabs(100 * v));
  if (v < 0) return "\u2212" + s;
  if (v > 0) return "+" + s;
  return s;
}

/// Which indices of `values` a curve draws (see the header comment).
std::vector<std::size_t> plotted_points(const std::vector<double>& values, std::size_t max_points) {
  std::vector<std::size_t> valid;
  for (std::size_t i = 0; i < values.size(); ++i)
    if (!std::isnan(values[i])) valid.push_back(i);
  if (valid.size() <= max_points) return valid;
  const std::size_t bins = std::max<std::size_t>(1, max_points / 2);
  std::vector<std::size_t> out;
  for (std::size_t b = 0; b < bins; ++b) {
    const std::size_t from = b * valid.size() / bins, to = (b + 1) * valid.size() / bins;
    if (from >= to) continue;
    std::size_t lo = valid[from], hi = valid[from];
    for (std::size_t k = from; k < to; ++k) {
      if (values[valid[k]] < values[lo]) lo = valid[k];
      if (values[valid[k]] > values[hi]) hi = valid[k];
    }
    out.push_back(std::min(lo, hi));
    if (lo != hi) out.push_back(std::max(lo, hi));
  }
  return out;
}

std::string index_list(const std::vector<std::size_t>& indices) {
  std::string out;
  for (std::size_t i = 0; i < indices.size(); ++i) {
    if (i) out += ' ';
    out += std::to_string(indices[i]);
  }
  return out;
}

/// Bin b of `count` items split into `bins` runs: [first, last).
std::pair<std::size_t, std::size_t> bin_range(std::size_t b, std::size_t count, std::size_t bins) {
  return {b * count / bins, (b + 1) * count / bins};
}

/// Pixel edges of the cells of a grid drawn on [from, to]: each cell reaches
/// halfway to its neighbours, the outer cells as far out as inwards, and the
/// returned axis places the grid values at the cell centres.
struct CellAxis {
  Axis axis;
  std::vector<double> edges;  // count + 1 pixel positions
};

CellAxis cell_axis(const std::vector<double>& values, svg::Scale scale, double from, double to) {
  CellAxis c;
  const std::size_t count = values.size();
  c.axis = {values.front(), values.back(), from, to, scale};
  if (count < 2) {
    c.edges = {from, to};
    return c;
  }
  const Axis unit{values.front(), values.back(), 0, 1, scale};
  const double u1 = unit(values[1]), u2 = unit(values[count - 2]);
  const double span = to - from;
  const double inner = span / (1 + (u1 + 1 - u2) / 2);
  c.axis.from = from + u1 * inner / 2;
  c.axis.to = c.axis.from + inner;
  c.axis.pad_lo = std::fabs(c.axis.from - from);
  c.axis.pad_hi = std::fabs(to - c.axis.to);
  c.edges.resize(count + 1);
  c.edges[0] = from;
  c.edges[count] = to;
  for (std::size_t i = 1; i < count; ++i) c.edges[i] = (c.axis(values[i - 1]) + c.axis(values[i])) / 2;
  return c;
}

class Report {
 public:
  Report(const CubeReader& cube, const ReportOptions& options)
      : cube_(cube),
        opt_(options),
        exact_(cube.has_exact()),
        group_(exact_ ? "exact" : "mc"),
        n_index_(report_n_indices(cube, options.n)),
        p_scale_(svg::evenest_scale(cube.p, true)),
        n_scale_(svg::evenest_scale(std::vector<double>(cube.n.begin(), cube.n.end()), false)),
        rank_(ranking(cube)) {
    for (const char* name : {"mean_coverage", "min_coverage", "min_coverage_p", "rms_deviation",
                             "share_below", "mean_width", "mean_miss_low", "mean_miss_high"})
      stats_[name] = cube.summary(exact_ ? std::string(name) : std::string("mc_") + name);
    if (exact_)
      for (const char* name : {"inf_coverage", "inf_coverage_p", "mean_coverage_continuous"})
        stats_[name] = cube.summary(name);
  }

  std::string html();

 private:
  struct Combo {
    std::size_t model, side, level;
  };
  double stat(const std::string& name, const Combo& c, std::size_t m, std::size_t ni) const {
    return stats_.at(name)[cube_.summary_index(c.model, c.side, c.level, m, ni)];
  }
  std::vector<double> row(const std::string& metric, const Combo& c, std::size_t m, std::size_t ni) const {
    return cube_.rows(group_, metric, c.model, c.side, c.level, m, ni, 1);
  }
  Attrs data_of(const Combo& c, std::size_t m) const {
    return {{"data-source", group_},
            {"data-model", cube_.models[c.model]},
            {"data-side", cube_.sides[c.side]},
            {"data-level", exact(cube_.levels[c.level])},
            {"data-method", cube_.methods[m]}};
  }
  std::string combo_title(const Combo& c) const {
    return fmt::format("{} model · {} · nominal {}", cube_.models[c.model], cube_.sides[c.side],
                       level_text(cube_.levels[c.level]));
  }
  static std::string combo_id(const Combo& c) { return fmt::format("s{}-{}-{}", c.model, c.side, c.level); }

  std::string provenance() const;
  std::string method_table() const;
  std::string model_panel() const;
  std::string section(const Combo& c) const;
  std::string coverage_figure(const Combo& c, const std::vector<std::size_t>& present) const;
  std::string heat_legend(const Combo& c) const;
  std::string heat_map(const Combo& c, std::size_t m) const;
  std::string width_figure(const Combo& c, const std::vector<std::size_t>& present) const;
  std::string method_legend(const std::vector<std::size_t>& present, double width) const;
  std::string tradeoff_figure(const Combo& c, const std::vector<RankingRow>& rows) const;
  std::string summary_table(const Combo& c, const std::vector<std::size_t>& present) const;
  std::string ranking_table(const Combo& c, const std::vector<RankingRow>& rows) const;

  const CubeReader& cube_;
  const ReportOptions& opt_;
  bool exact_;
  std::string group_;
  std::vector<std::size_t> n_index_;
  svg::Scale p_scale_, n_scale_;
  std::vector<RankingRow> rank_;
  std::map<std::string, std::vector<double>> stats_;
};

/// Marks a page as a covergrid report, so that a later report may replace it.
constexpr const char* generator_meta = "<meta name=\"generator\" content=\"covergrid report\"/>";

const char* const style_sheet = R"(
body { font-family: "DejaVu Sans", "Liberation Sans", Arial, sans-serif; color: #1d1d1d; background: #fff;
  max-width: 1160px; margin: 0 auto; padding: 16px 20px 40px; line-height: 1.4;
  -webkit-print-color-adjust: exact; print-color-adjust: exact; }
h1 { font-size: 24px; margin: 8px 0 4px; }
h2 { font-size: 19px; margin: 28px 0 8px; border-bottom: 2px solid #1b4f8f; padding-bottom: 3px; }
h3 { font-size: 15px; margin: 20px 0 6px; }
p.lead { margin: 0 0 12px; color: #444; }
aside.caution { border-left: 5px solid #e08b1f; background: #fdf5ea; padding: 8px 12px; margin: 12px 0; }
p.note { background: #f1f1ef; padding: 6px 10px; }
table { border-collapse: collapse; font-size: 12.5px; margin: 6px 0 10px; }
th, td { border-bottom: 1px solid #d6d6d6; padding: 3px 8px; text-align: left; vertical-align: top; }
th { background: #eef2f7; }
td.label { white-space: nowrap; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
table.meta th { background: none; font-weight: 600; white-space: nowrap; }
pre { background: #f6f6f4; border: 1px solid #ddd; padding: 8px 10px; font-size: 12px; white-space: pre-wrap; }
code { font-size: 92%; }
figure { margin: 8px 0 14px; }
figcaption { font-size: 12.5px; color: #333; max-width: 1080px; margin-top: 4px; }
div.maps { display: flex; flex-wrap: wrap; gap: 0; }
nav ol { columns: 2; font-size: 14px; }
svg { font-family: "DejaVu Sans", "Liberation Sans", Arial, sans-serif; display: block; max-width: 100%;
  height: auto; }
svg .grid { stroke: #e7e7e7; stroke-width: 1; }
svg .tick { stroke: #555; stroke-width: 1; }
svg .frame { fill: none; stroke: #555; stroke-width: 1; }
svg .tick-label { font-size: 11px; fill: #333; }
svg .axis-title { font-size: 11.5px; fill: #111; }
svg .panel-title { font-size: 11px; font-weight: 600; fill: #111; }
svg .row-title { font-size: 12.5px; font-weight: 700; fill: #1b4f8f; }
svg .nominal { stroke: #111; stroke-width: 1; stroke-dasharray: 5 3; }
svg .series { stroke-width: 1.5; stroke-linejoin: round; }
svg .band { stroke: none; opacity: 0.28; }
svg .legend-text { font-size: 11px; fill: #111; }
svg .point-label, svg .nominal-label { font-size: 11px; fill: #111; }
svg .leader { stroke: #777; stroke-width: 0.8; }
svg .break-mark { stroke: #555; stroke-width: 1.2; }
svg .break-note { font-size: 11px; fill: #444; font-style: italic; }
svg .heat-row rect, svg rect.heat-key { stroke: none; }
)";

std::string heat_class_css() {
  std::string css;
  for (std::size_t k = 0; k < class_colours.size(); ++k)
    css += fmt::format("svg .k{} {{ fill: {}; }}\n", k, class_colours[k]);
  css += fmt::format("svg .k{} {{ fill: {}; }}\n", no_value_class, no_value_colour);
  css +=
      "@media print { nav { display: none; } section.combo { break-before: page; } "
      "figure, table, svg { break-inside: avoid; } figure.coverage { break-inside: auto; } "
      "body { max-width: none; padding: 0; } }\n";
  return css;
}

std::string html_table_row(const std::vector<std::pair<std::string, double>>& cells) {
  // A cell with a NaN number is text; otherwise a right-aligned number carrying its value.
  std::string out = "<tr>";
  for (const auto& [text, value] : cells) {
    if (std::isnan(value))
      out += "<td class=\"label\">" + escape(text) + "</td>";
    else
      out += fmt::format("<td class=\"num\" data-value=\"{}\">{}</td>", exact(value), escape(text));
  }
  return out + "</tr>\n";
}

std::string html_head_row(const std::vector<std::string>& names) {
  std::string out = "<tr>";
  for (const auto& n : names) out += "<th>" + escape(n) + "</th>";
  return out + "</tr>\n";
}

std::string Report::html() {
  const std::string title = cube_.attr("title").empty() ? "covergrid results" : cube_.attr("title");
  std::string out;
  out += "<!DOCTYPE html>\n<html xmlns=\"http://www.w3.org/1999/xhtml\" lang=\"en\">\n<head>\n";
  out += "<meta charset=\"utf-8\"/>\n" + std::string(generator_meta) +
         "\n<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"/>\n";
  out += "<title>" + escape(title) + " — covergrid report</title>\n";
  out += "<style>" + std::string(style_sheet) + heat_class_css() + "</style>\n</head>\n<body>\n";
  out += "<header>\n<h1>" + escape(title) + "</h1>\n";
  out += fmt::format(
      "<p class=\"lead\">Coverage report of the cube <code>{}</code>: {}.</p>\n</header>\n",
      escape(fs::path(cube_.path()).filename().string()),
      exact_ ? "exact coverage, misses and width by binomial enumeration"
             : "simulated coverage, misses and width (Monte Carlo estimates with their standard errors)");
  out += "<aside class=\"caution\"><strong>Caution.</strong> " + escape(coverage_caution) + "</aside>\n";
  out += provenance();

  std::vector<Combo> combos;
  for (std::size_t mo = 0; mo < cube_.models.size(); ++mo)
    for (std::size_t s = 0; s < cube_.sides.size(); ++s)
      for (std::size_t l = 0; l < cube_.levels.size(); ++l) combos.push_back({mo, s, l});
  out += "<nav>\n<h2>Contents</h2>\n<ol>\n<li><a href=\"#methods\">Methods</a></li>\n";
  if (cube_.models.size() > 1) out += "<li><a href=\"#models\">Models compared</a></li>\n";
  for (const auto& c : combos)
    out += fmt::format("<li><a href=\"#{}\">{}</a></li>\n", combo_id(c), escape(combo_title(c)));
  out += "<li><a href=\"#scenario\">Scenario</a></li>\n</ol>\n</nav>\n";
  out += method_table();
  if (cube_.models.size() > 1) out += model_panel();
  for (const auto& c : combos) out += section(c);
  out +=
      "<section id=\"scenario\">\n<h2>Scenario</h2>\n<p>The scenario file the cube was computed from, as "
      "stored in the cube:</p>\n<pre>" +
      escape(cube_.attr("scenario")) + "</pre>\n</section>\n";
  out += "<footer>\n<h2>Cautions</h2>\n<p>" + escape(coverage_caution) + "</p>\n";
  out += fmt::format(
      "<p>Written by covergrid {} from the values in the cube alone; every drawn value is carried at full "
      "precision in the data attributes of its SVG element.</p>\n</footer>\n</body>\n</html>\n",
      escape(tool_version));
  return out;
}

std::string Report::provenance() const {
  const auto& c = cube_;
  std::vector<std::pair<std::string, std::string>> rows = {
      {"title", c.attr("title")},
      {"cube file", fs::path(c.path()).filename().string()},
      {"cube SHA-256", file_sha256(c.path())},
      {"cube size", fmt::format("{} bytes", fs::file_size(c.path()))},
      {"created (UTC)", c.attr("created_utc")},
      {"written by", "covergrid " + c.attr("tool_version")},
      {"cube format", c.attr("format") + " version " + c.attr("format_version")},
      {"seed", c.attr("seed")},
      {"scenario SHA-256", c.attr("scenario_sha256")},
      {"shard", c.attr("shard")},
  };
  std::string sources = exact_ ? "exact (binomial enumeration)" : "Monte Carlo only";
  if (exact_ && c.has_mc()) sources += " and Monte Carlo (the report draws the exact figures)";
  if (c.has_mc()) {
    double lo = inf, hi = 0;
    for (std::size_t mo = 0; mo < c.models.size(); ++mo)
      for (std::size_t ni = 0; ni < c.n.size(); ++ni)
        for (double r : c.mc_replicates(mo, ni)) {
          lo = std::min(lo, r);
          hi = std::max(hi, r);
        }
    sources += lo == hi ? fmt::format("; {:.0f} replicates per cell", lo)
                        : fmt::format("; {:.0f} to {:.0f} replicates per cell", lo, hi);
  }
  rows.emplace_back("results", sources);
  std::string levels, models, sides;
  for (double l : c.levels) levels += (levels.empty() ? "" : ", ") + level_text(l);
  for (const auto& m : c.models) models += (models.empty() ? "" : ", ") + m;
  for (const auto& s : c.sides) sides += (sides.empty() ? "" : ", ") + s;
  rows.emplace_back("models", models);
  rows.emplace_back("sides", sides);
  rows.emplace_back("levels", levels);
  std::string out = "<section id=\"cube\">\n<h2>The cube</h2>\n<table class=\"meta\">\n";
  for (const auto& [k, v] : rows) out += "<tr><th>" + escape(k) + "</th><td>" + escape(v) + "</td></tr>\n";
  std::vector<double> n_values(c.n.begin(), c.n.end());
  out += fmt::format("<tr><th>n</th><td id=\"n-axis\" data-n=\"{}\">{} values from {} to {}</td></tr>\n",
                     svg::exact_list(n_values), c.n.size(), c.n.front(), c.n.back());
  out += fmt::format("<tr><th>p</th><td id=\"p-axis\" data-p=\"{}\">{} values from {} to {}{}</td></tr>\n",
                     svg::exact_list(c.p), c.p.size(), c.p.front(), c.p.back(),
                     p_scale_ == svg::Scale::logit ? ", evenly spaced in log-odds" : "");
  std::string drawn;
  for (std::size_t i : n_index_) drawn += (drawn.empty() ? "" : ", ") + std::to_string(c.n[i]);
  out += "<tr><th>n drawn against p</th><td>" + escape(drawn) + "</td></tr>\n";
  out += "<tr><th>report written by</th><td>covergrid " + escape(tool_version) + "</td></tr>\n";
  return out + "</table>\n</section>\n";
}

std::string Report::method_table() const {
  std::string out = "<section id=\"methods\">\n<h2>Methods</h2>\n<table>\n";
  out += html_head_row({"label", "method", "family", "parameters", "reference"});
  for (const auto& label : cube_.methods) {
    const auto found = cube_.method_info.find(label);
    std::map<std::string, std::string> info;
    if (found != cube_.method_info.end()) info = found->second;
    std::string params;
    for (const auto& [k, v] : info)
      if (k.rfind("param.", 0) == 0) params += (params.empty() ? "" : ", ") + k.substr(6) + " = " + v;
    out += "<tr><td><code>" + escape(label) + "</code></td><td>" + escape(info["name"]) + "</td><td>" +
           escape(info["family"]) + "</td><td>" + escape(params) + "</td><td>" + escape(info["reference"]) +
           "</td></tr>\n";
  }
  return out + "</table>\n</section>\n";
}

/// The same method's coverage under each sampling model of the cube, per
/// side and level: the worst case and the mean over the whole n range, as
/// in the ranking (the attainable p of a finite population).
std::string Report::model_panel() const {
  std::string out =
      "<section id=\"models\">\n<h2>Models compared</h2>\n<p>The same method under each sampling model of "
      "the cube: its worst coverage (the smallest over n of the " +
      std::string(exact_ ? "exact infimum over the p range" : "simulated grid minimum") +
      ") and its mean coverage over p, averaged over n. Under a finite population the true proportion takes "
      "only the values K/N, and both figures are taken over those.</p>\n";
  for (std::size_t s = 0; s < cube_.sides.size(); ++s)
    for (std::size_t l = 0; l < cube_.levels.size(); ++l) {
      out += fmt::format(
          "<h3>{} · nominal {}</h3>\n<table class=\"models\" data-side=\"{}\" data-level=\"{}\">\n",
          escape(cube_.sides[s]), level_text(cube_.levels[l]), escape(cube_.sides[s]),
          exact(cube_.levels[l]));
      std::vector<std::string> head = {"method"};
      for (const auto& m : cube_.models) {
        head.push_back(m + ": worst %");
        head.push_back(m + ": mean %");
      }
      out += html_head_row(head);
      for (std::size_t m = 0; m < cube_.methods.size(); ++m) {
        std::vector<std::pair<std::string, double>> cells = {{cube_.methods[m], nan}};
        bool any = false;
        for (std::size_t mo = 0; mo < cube_.models.size(); ++mo) {
          const RankingRow* found = nullptr;
          for (const auto& r : rank_)
            if (r.model == mo && r.side == s && r.level == l && r.method == m) found = &r;
          any |= found != nullptr;
          cells.emplace_back(found ? pct(found->worst_inf) + (found->simulated ? " (sim.)" : "") : "–",
                             found ? found->worst_inf : nan);
          cells.emplace_back(found ? pct(found->mean_coverage) : "–", found ? found->mean_coverage : nan);
        }
        if (any) out += html_table_row(cells);
      }
      out += "</table>\n";
    }
  return out + "</section>\n";
}

std::string Report::section(const Combo& c) const {
  std::vector<std::size_t> present, absent;
  const auto& defined = stats_.at("min_coverage");
  for (std::size_t m = 0; m < cube_.methods.size(); ++m) {
    bool any = false;
    for (std::size_t ni = 0; ni < cube_.n.size() && !any; ++ni)
      any = !std::isnan(defined[cube_.summary_index(c.model, c.side, c.level, m, ni)]);
    (any ? present : absent).push_back(m);
  }
  std::string out =
      fmt::format("<section class=\"combo\" id=\"{}\">\n<h2>{}</h2>\n", combo_id(c), escape(combo_title(c)));
  // Methods with simulated figures only here (RankingRow::simulated) are
  // not missing a side: they are named apart, and appear in the ranking.
  std::vector<std::size_t> simulated_only;
  for (const auto& r : rank_)
    if (r.model == c.model && r.side == c.side && r.level == c.level && r.simulated)
      simulated_only.push_back(r.method);
  if (!simulated_only.empty()) {
    std::string names;
    for (std::size_t m : simulated_only) names += (names.empty() ? "" : ", ") + cube_.methods[m];
    out += "<p class=\"note\">Simulated only: " + escape(names) +
           (simulated_only.size() == 1 ? " needs" : " need") +
           " each cluster's count, which the exact engine cannot sum over; " +
           (simulated_only.size() == 1 ? "its" : "their") +
           " Monte Carlo figures are in the ranking below and in the cube's /mc group.</p>\n";
    absent.erase(std::remove_if(absent.begin(), absent.end(),
                                [&](std::size_t m) {
                                  return std::find(simulated_only.begin(), simulated_only.end(), m) !=
                                         simulated_only.end();
                                }),
                 absent.end());
  }
  if (!absent.empty()) {
    std::string names;
    for (std::size_t m : absent) names += (names.empty() ? "" : ", ") + cube_.methods[m];
    out += "<p class=\"note\">Left out: " + escape(names) + (absent.size() == 1 ? " does" : " do") +
           " not define the " + escape(cube_.sides[c.side]) + " side (the cube holds no values for " +
           (absent.size() == 1 ? "it" : "them") + " here).</p>\n";
  }
  if (present.empty()) return out + "<p>No method of the cube defines this side.</p>\n</section>\n";
  if (!exact_)
    out +=
        "<p class=\"note\">Simulated: every figure in this section is a Monte Carlo estimate; the coverage "
        "panels show a band of ±1.96 standard errors around it, and the summary table the largest standard "
        "error.</p>\n";
  out += "<h3>Coverage against p</h3>\n" + coverage_figure(c, present);
  out +=
      "<h3>Coverage minus nominal over n and p</h3>\n<figure>\n" + heat_legend(c) + "<div class=\"maps\">\n";
  for (std::size_t m : present) out += heat_map(c, m);
  const bool binned = cube_.n.size() > opt_.max_bins || cube_.p.size() > opt_.max_bins;
  out += fmt::format(
      "</div>\n<figcaption>{} coverage minus the nominal {} on the whole grid of the cube ({} n × {} p), one "
      "map "
      "per method{}. The colour classes are multiples of α = 1 − level (here {} points), so that the same "
      "colour means the same relative miss rate at every level.</figcaption>\n</figure>\n",
      exact_ ? "Exact" : "Simulated", level_text(cube_.levels[c.level]), cube_.n.size(), cube_.p.size(),
      binned ? fmt::format("; binned down to at most {0} × {0} cells, each cell showing the minimum coverage "
                           "over the grid points it holds",
                           opt_.max_bins)
             : "; one cell per grid point",
      fmt::format("{:g}", 100 * (1 - cube_.levels[c.level])));
  out += "<h3>Expected width against p</h3>\n" + width_figure(c, present);
  std::vector<RankingRow> rows;
  for (const auto& r : rank_)
    if (r.model == c.model && r.side == c.side && r.level == c.level) rows.push_back(r);
  std::vector<RankingRow> same_basis;  // the figure compares exact worst cases only
  for (const auto& r : rows)
    if (!r.simulated) same_basis.push_back(r);
  out += "<h3>Width against worst-case coverage</h3>\n" + tradeoff_figure(c, same_basis);
  out += "<h3>Summary at the drawn n</h3>\n" + summary_table(c, present);
  out += "<h3>Ranking over the whole n range</h3>\n" + ranking_table(c, rows);
  return out + "</section>\n";
}

std::string Report::coverage_figure(const Combo& c, const std::vector<std::size_t>& present) const {
  const double level = cube_.levels[c.level], alpha = 1 - level;
  const double y_lo = std::max(0.0, level - panel_floor_alphas * alpha);
  // At most three panels a row across the page width, so that each plot area
  // is at least min_panel_w x min_panel_h pixels; one SVG per method, so that
  // print breaks pages between methods rather than through a panel.
  const std::size_t count = n_index_.size();
  const std::size_t cols = std::min(max_panel_columns, count);
  const std::size_t panel_rows = (count + cols - 1) / cols;
  const double panel_w = std::floor(page_width / static_cast<double>(cols));
  const double title_h = 20, head_h = 22, foot_h = 40;
  const double plot_h = min_panel_h;
  const double panel_h = head_h + plot_h + foot_h;
  const double height = title_h + panel_h * static_cast<double>(panel_rows);
  std::string svgs;
  for (const std::size_t m : present) {
    Canvas svg(panel_w * static_cast<double>(cols), height,
               "Coverage against p, " + cube_.methods[m] + ", " + combo_title(c),
               {{"class", "coverage-panels"}});
    svg.text(6, 15, cube_.methods[m], {{"class", "row-title"}});
    for (std::size_t k = 0; k < count; ++k) {
      const std::size_t ni = n_index_[k];
      const double left = panel_w * static_cast<double>(k % cols),
                   top = title_h + panel_h * static_cast<double>(k / cols);
      const Axis x{cube_.p.front(), cube_.p.back(), left + 58, left + panel_w - 14, p_scale_};
      const auto& at_p = cube_.attained_p(c.model);  // a finite population's K/N, drawn where evaluated
      const Axis y{y_lo, 1.0, top + head_h + plot_h, top + head_h, svg::Scale::linear};
      svg.text(left + 58, top + 16, fmt::format("n = {}", cube_.n[ni]), {{"class", "panel-title"}});
      svg.axes(x, y, "p", k % cols == 0 ? "coverage" : "");
      const auto values = row("coverage", c, m, ni);
      const auto keep = plotted_points(values, opt_.max_points);
      std::vector<double> px_x, px_y, v_drawn;
      for (std::size_t i : keep) {
        px_x.push_back(x(at_p[i]));
        px_y.push_back(y(values[i]));
        v_drawn.push_back(values[i]);
      }
      svg.open_plot_area(x, y, {{"class", "plot-area"}, {"data-kind", "coverage"}});
      svg.line(x.from, y(level), x.to, y(level), {{"class", "nominal"}});
      Attrs data = data_of(c, m);
      data.insert(data.begin(), {{"class", "series"}, {"data-kind", "coverage"}});
      data.emplace_back("data-n", std::to_string(cube_.n[ni]));
      data.emplace_back("data-p-index", index_list(keep));
      data.emplace_back("data-values", svg::exact_list(v_drawn));
      if (!exact_) {
        const auto se = row("coverage_se", c, m, ni);
        std::vector<double> se_drawn, band_x, band_y;
        for (std::size_t i : keep) se_drawn.push_back(se[i]);
        for (std::size_t j = 0; j < keep.size(); ++j) {
          band_x.push_back(px_x[j]);
          band_y.push_back(y(std::min(1.0, v_drawn[j] + 1.96 * se_drawn[j])));
        }
        for (std::size_t j = keep.size(); j-- > 0;) {
          band_x.push_back(px_x[j]);
          band_y.push_back(y(std::max(0.0, v_drawn[j] - 1.96 * se_drawn[j])));
        }
        svg.polygon(band_x, band_y, {{"class", "band"}, {"fill", line_colours[m % line_colours.size()]}});
        data.emplace_back("data-se", svg::exact_list(se_drawn));
      }
      data.emplace_back("stroke", line_colours[m % line_colours.size()]);  // one curve a panel: no dashes
      svg.polyline(px_x, px_y, data);
      if (keep.size() == 1)
        svg.element("circle", {{"cx", px(px_x[0])},
                               {"cy", px(px_y[0])},
                               {"r", "2.5"},
                               {"fill", line_colours[m % line_colours.size()]}});
      svg.close();
    }
    svgs += svg.finish();
  }
  std::string caption = fmt::format(
      "{} coverage P(L ≤ p ≤ U) against the true p, one row of panels per method and one panel per n; the "
      "dashed line is the nominal {}. The vertical axis runs from {} to 1: lower coverage leaves the panel "
      "at "
      "its foot.",
      exact_ ? "Exact" : "Simulated", level_text(level), fmt::format("{:g}", y_lo));
  if (p_scale_ == svg::Scale::logit) caption += " The p axis is in log-odds, as the grid is.";
  if (cube_.p.size() > opt_.max_points)
    caption += fmt::format(
        " With {} p values on the grid, each curve keeps the lowest and highest value of each run of "
        "consecutive points ({} points at most).",
        cube_.p.size(), opt_.max_points);
  if (!exact_) caption += " The band spans ±1.96 standard errors of the estimate.";
  return "<figure class=\"coverage\">\n" + svgs + "<figcaption>" + escape(caption) +
         "</figcaption>\n</figure>\n";
}

std::string Report::heat_legend(const Combo& c) const {
  const auto bounds = class_bounds(cube_.levels[c.level]);
  const double key_w = 104, left = 10;
  Canvas svg(left + key_w * static_cast<double>(class_colours.size()) + 230, 64,
             "Colour classes of coverage minus nominal",
             {{"class", "heat-legend"}, {"data-slack", exact(engine::coverage_decision_slack)}});
  for (std::size_t k = 0; k < class_colours.size(); ++k) {
    const double x = left + key_w * static_cast<double>(k);
    svg.rect(x, 6, key_w - 2, 18,
             {{"class", fmt::format("heat-key k{}", k)},
              {"data-lo", exact(bounds.lo[k])},
              {"data-hi", exact(bounds.hi[k])}});
    std::string label;
    if (std::isinf(bounds.lo[k]))
      label = "below " + points_text(bounds.hi[k]);
    else if (std::isinf(bounds.hi[k]))
      label = points_text(bounds.lo[k]) + " or more";
    else
      label = points_text(bounds.lo[k]) + " to " + points_text(bounds.hi[k]);
    svg.text(x + (key_w - 2) / 2, 38, label, {{"class", "legend-text"}, {"text-anchor", "middle"}});
  }
  const double end = left + key_w * static_cast<double>(class_colours.size());
  svg.rect(end + 14, 6, 30, 18, {{"class", fmt::format("heat-key k{}", no_value_class)}});
  svg.text(end + 50, 19, "no value", {{"class", "legend-text"}});
  svg.text(left, 56,
           "coverage minus nominal, percentage points (bin minimum) — orange: below nominal, blue: above",
           {{"class", "legend-text"}});
  return svg.finish();
}

std::string Report::heat_map(const Combo& c, std::size_t m) const {
  const double level = cube_.levels[c.level];
  const auto bounds = class_bounds(level);
  const std::size_t N = cube_.n.size(), P = cube_.p.size();
  const std::size_t n_bins = std::min(N, opt_.max_bins), p_bins = std::min(P, opt_.max_bins);
  // Minimum coverage per bin, read in blocks of whole rows.
  std::vector<double> minimum(n_bins * p_bins, nan);
  std::vector<std::size_t> n_bin_of(N), p_bin_of(P);
  for (std::size_t b = 0; b < n_bins; ++b) {
    const auto [first, last] = bin_range(b, N, n_bins);
    for (std::size_t i = first; i < last; ++i) n_bin_of[i] = b;
  }
  for (std::size_t b = 0; b < p_bins; ++b) {
    const auto [first, last] = bin_range(b, P, p_bins);
    for (std::size_t j = first; j < last; ++j) p_bin_of[j] = b;
  }
  const std::size_t block = std::max<std::size_t>(1, (std::size_t{1} << 20) / P);
  for (std::size_t n0 = 0; n0 < N; n0 += block) {
    const std::size_t count = std::min(block, N - n0);
    const auto values = cube_.rows(group_, "coverage", c.model, c.side, c.level, m, n0, count);
    for (std::size_t i = 0; i < count; ++i)
      for (std::size_t j = 0; j < P; ++j) {
        const double v = values[i * P + j];
        double& slot = minimum[n_bin_of[n0 + i] * p_bins + p_bin_of[j]];
        if (!std::isnan(v) && (std::isnan(slot) || v < slot)) slot = v;
      }
  }

  const double w = 556, h = 300;
  const double left = 62, right = w - 14, top = 26, bottom = h - 44;
  std::vector<double> n_values(cube_.n.begin(), cube_.n.end());
  const CellAxis x = cell_axis(cube_.p, p_scale_, left, right);
  const CellAxis y = cell_axis(n_values, n_scale_, bottom, top);
  Canvas svg(w, h, "Coverage minus nominal, " + cube_.methods[m] + ", " + combo_title(c),
             {{"class", "heat"}});
  svg.text(left, 16, cube_.methods[m], {{"class", "panel-title"}});
  std::string p_bins_text;
  for (std::size_t b = 0; b < p_bins; ++b) {
    const auto [first, last] = bin_range(b, P, p_bins);
    if (b) p_bins_text += ' ';
    p_bins_text += exact(cube_.p[first]) + ":" + exact(cube_.p[last - 1]);
  }
  Attrs data = data_of(c, m);
  data.insert(data.begin(), {"class", "heat-map"});
  data.emplace_back("data-p-bins", p_bins_text);
  data.emplace_back("shape-rendering", "crispEdges");
  svg.open("g", data);
  for (std::size_t b = 0; b < n_bins; ++b) {
    const auto [n_first, n_last] = bin_range(b, N, n_bins);
    std::vector<double> row_min(minimum.begin() + static_cast<std::ptrdiff_t>(b * p_bins),
                                minimum.begin() + static_cast<std::ptrdiff_t>((b + 1) * p_bins));
    svg.open("g", {{"class", "heat-row"},
                   {"data-n-range", fmt::format("{} {}", cube_.n[n_first], cube_.n[n_last - 1])},
                   {"data-values", svg::exact_list(row_min)}});
    const double y_bottom = y.edges[n_first], y_top = y.edges[n_last];
    // Runs of bins of one colour class are one rectangle.
    for (std::size_t a = 0; a < p_bins;) {
      const std::size_t k = heat_class(row_min[a], level, bounds);
      std::size_t e = a;
      while (e + 1 < p_bins && heat_class(row_min[e + 1], level, bounds) == k) ++e;
      const double x0 = x.edges[bin_range(a, P, p_bins).first], x1 = x.edges[bin_range(e, P, p_bins).second];
      // Widened by a fraction of a pixel so that rounding leaves no seams.
      svg.rect(x0, y_top, x1 - x0 + 0.4, y_bottom - y_top + 0.4,
               {{"class", fmt::format("k{}", k)}, {"data-bins", fmt::format("{} {}", a, e)}});
      a = e + 1;
    }
    svg.close();
  }
  svg.close();
  svg.axes(x.axis, y.axis, "p", "n", false);
  return svg.finish();
}

std::string Report::method_legend(const std::vector<std::size_t>& present, double width) const {
  const double item_w = 200, row_h = 18;
  const std::size_t per_row = std::max<std::size_t>(1, static_cast<std::size_t>(width / item_w));
  const std::size_t rows = (present.size() + per_row - 1) / per_row;
  Canvas svg(width, row_h * static_cast<double>(rows) + 6, "Methods", {{"class", "method-legend"}});
  for (std::size_t i = 0; i < present.size(); ++i) {
    const double x = 10 + item_w * static_cast<double>(i % per_row);
    const double y = 12 + row_h * static_cast<double>(i / per_row);
    Attrs style = line_style(present[i]);
    style.emplace_back("stroke-width", "2");
    svg.line(x, y - 4, x + 28, y - 4, style);
    svg.text(x + 34, y, cube_.methods[present[i]], {{"class", "legend-text"}});
  }
  return svg.finish();
}

std::string Report::width_figure(const Combo& c, const std::vector<std::size_t>& present) const {
  const std::size_t count = n_index_.size();
  const std::size_t per_row = std::min<std::size_t>(3, count);
  const double panel_w = std::floor(page_width / 3), panel_h = 250;
  const std::size_t rows = (count + per_row - 1) / per_row;
  Canvas svg(panel_w * static_cast<double>(per_row), panel_h * static_cast<double>(rows),
             "Expected width against p, " + combo_title(c), {{"class", "width-panels"}});
  for (std::size_t k = 0; k < count; ++k) {
    const std::size_t ni = n_index_[k];
    std::vector<std::vector<double>> values;
    double hi = 0;
    for (std::size_t m : present) {
      values.push_back(row("width", c, m, ni));
      for (double v : values.back())
        if (!std::isnan(v)) hi = std::max(hi, v);
    }
    const double left = panel_w * static_cast<double>(k % per_row),
                 top = panel_h * static_cast<double>(k / per_row);
    const Axis x{cube_.p.front(), cube_.p.back(), left + 52, left + panel_w - 12, p_scale_};
    const auto& at_p = cube_.attained_p(c.model);  // a finite population's K/N, drawn where evaluated
    const Axis y{0, svg::nice_range(0, hi > 0 ? hi : 1, 5).second, top + panel_h - 40, top + 20,
                 svg::Scale::linear};
    svg.text(left + 52, top + 14, fmt::format("n = {}", cube_.n[ni]), {{"class", "panel-title"}});
    svg.axes(x, y, "p", "expected width E[U − L]");
    svg.open_plot_area(x, y);
    for (std::size_t r = 0; r < present.size(); ++r) {
      const std::size_t m = present[r];
      const auto keep = plotted_points(values[r], opt_.max_points);
      std::vector<double> px_x, px_y, v_drawn;
      for (std::size_t i : keep) {
        px_x.push_back(x(at_p[i]));
        px_y.push_back(y(values[r][i]));
        v_drawn.push_back(values[r][i]);
      }
      Attrs data = data_of(c, m);
      data.insert(data.begin(), {{"class", "series"}, {"data-kind", "width"}});
      data.emplace_back("data-n", std::to_string(cube_.n[ni]));
      data.emplace_back("data-p-index", index_list(keep));
      data.emplace_back("data-values", svg::exact_list(v_drawn));
      for (const auto& a : line_style(m)) data.push_back(a);
      svg.polyline(px_x, px_y, data);
    }
    svg.close();
  }
  std::string caption = fmt::format(
      "{} expected width E[U − L] of the clipped interval against p, all methods in one panel per n (each "
      "panel has its own vertical scale).",
      exact_ ? "Exact" : "Simulated");
  if (cube_.p.size() > opt_.max_points)
    caption +=
        fmt::format(" Each curve keeps the lowest and highest value of each run of points ({} at most).",
                    opt_.max_points);
  return "<figure>\n" + method_legend(present, page_width) + svg.finish() + "<figcaption>" + escape(caption) +
         "</figcaption>\n</figure>\n";
}

std::string Report::tradeoff_figure(const Combo& c, const std::vector<RankingRow>& rows) const {
  if (rows.empty()) return "<p>No method has figures at every n here.</p>\n";
  const double level = cube_.levels[c.level], alpha = 1 - level;
  // Far off: a worst case that does not reach nominal - 4 alpha (the foot of
  // the coverage panels). Far-off points go to a strip below the main panel
  // with its own vertical scale (a broken axis), so that the methods near
  // nominal keep the main panel's height.
  const double far_threshold = level - 4 * alpha;
  std::vector<std::size_t> near, far;
  for (std::size_t i = 0; i < rows.size(); ++i)
    (engine::meets_coverage(rows[i].worst_inf, far_threshold) ? near : far).push_back(i);
  const bool broken = !near.empty() && !far.empty();
  if (!broken) {
    near.insert(near.end(), far.begin(), far.end());
    std::sort(near.begin(), near.end());
    far.clear();
  }
  const auto range_of = [&](const std::vector<std::size_t>& which, bool with_nominal, double min_span) {
    double lo = with_nominal ? level : inf, hi = with_nominal ? level : -inf;
    for (std::size_t i : which) {
      lo = std::min(lo, rows[i].worst_inf);
      hi = std::max(hi, rows[i].worst_inf);
    }
    const double pad = std::max(hi - lo, min_span) * 0.06;
    auto r = svg::nice_range(std::max(0.0, lo - pad), hi + pad, 6);
    r.first = std::max(0.0, r.first);
    r.second = std::min(1.0, r.second) > r.first ? std::min(1.0, r.second) : r.second;
    return r;
  };
  double x_lo = inf, x_hi = -inf;
  for (const auto& r : rows) {
    x_lo = std::min(x_lo, r.mean_width);
    x_hi = std::max(x_hi, r.mean_width);
  }
  const double x_pad = std::max(x_hi - x_lo, 1e-3) * 0.04;
  const auto [xa, xb] = svg::nice_range(std::max(0.0, x_lo - x_pad), x_hi + x_pad, 8);
  const auto [ya, yb] = range_of(near, true, alpha / 5);
  // The strip grows with the points it holds (room for their labels), up to 230 pixels.
  const double w = page_width, top = 16, main_h = 360, gap = 40, foot = 48;
  const double strip_h = std::min(230.0, 110 + 24 * static_cast<double>(far.size() > 2 ? far.size() - 2 : 0));
  const double strip_top = top + main_h + gap;
  const double h = (broken ? strip_top + strip_h : top + main_h) + foot;
  const Axis x{xa, xb, 84, w - 24, svg::Scale::linear};
  const Axis y{ya, yb, top + main_h, top, svg::Scale::linear};
  Axis y_far;
  if (broken) {
    const auto [fa, fb] = range_of(far, false, alpha);
    y_far = {fa, fb, strip_top + strip_h, strip_top, svg::Scale::linear};
  }
  const std::string x_title = "mean width (average over n of the grid mean)";
  Canvas svg(w, h, "Mean width against worst-case coverage, " + combo_title(c), {{"class", "tradeoff"}});
  svg.axes(x, y, broken ? "" : x_title,
           exact_ ? "worst-case coverage (exact infimum)" : "worst-case coverage (simulated)", true, !broken);
  if (broken) {
    svg.open("g", {{"class", "axis-break"},
                   {"data-threshold", exact(far_threshold)},
                   {"data-y-main", exact(ya) + " " + exact(yb)},
                   {"data-y-strip", exact(y_far.lo) + " " + exact(y_far.hi)}});
    svg.axes(x, y_far, x_title, "", true, true);
    // Two slanted strokes across each side of the gap mark the break.
    for (const double side : {x.from, x.to})
      for (const double at : {top + main_h + 14, strip_top - 14})
        svg.line(side - 6, at + 3, side + 6, at - 3, {{"class", "break-mark"}});
    svg.text(x.from + 12, top + main_h + gap / 2 + 8,
             fmt::format("vertical axis broken: the strip below has its own scale, for the methods whose "
                         "worst case is below nominal − 4α = {:g} %",
                         100 * far_threshold),
             {{"class", "break-note"}});
    svg.close();
  }
  svg.line(x.from, y(level), x.to, y(level), {{"class", "nominal"}});
  // The nominal line's label: right-aligned inside the frame, above the line
  // (below it when the line runs along the top); an obstacle for the point labels.
  const std::string nominal_label = "nominal " + level_text(level);
  double nominal_base = y(level) - 5;
  if (nominal_base - svg::text_ascent * label_font < y.to)
    nominal_base = y(level) + 5 + svg::text_ascent * label_font;
  const svg::Box nominal_box = svg::text_box(x.to - 4, nominal_base, nominal_label, label_font, "end");
  svg.text(x.to - 4, nominal_base, nominal_label,
           {{"class", "nominal-label"}, {"text-anchor", "end"}, {"data-box", box_text(nominal_box)}});

  constexpr double radius = 4.5;
  const auto draw_panel = [&](const std::vector<std::size_t>& which, const Axis& py, const std::string& panel,
                              const std::vector<svg::Box>& obstacles) {
    std::vector<std::pair<double, double>> at;
    std::vector<std::string> labels;
    for (std::size_t i : which) {
      at.emplace_back(x(rows[i].mean_width), py(rows[i].worst_inf));
      labels.push_back(cube_.methods[rows[i].method]);
    }
    const svg::Box bounds{x.from, py.to, x.to, py.from};
    const auto spots = svg::place_labels(at, radius, labels, label_font, bounds, obstacles);
    for (std::size_t k = 0; k < which.size(); ++k) {
      if (!spots[k].displaced) continue;
      const auto [cx, cy] = at[k];
      const double nx = std::clamp(cx, spots[k].box.x0, spots[k].box.x1),
                   ny = std::clamp(cy, spots[k].box.y0, spots[k].box.y1);
      const double d = std::hypot(nx - cx, ny - cy);
      if (d > radius)
        svg.line(cx + (nx - cx) * radius / d, cy + (ny - cy) * radius / d, nx, ny, {{"class", "leader"}});
    }
    for (std::size_t k = 0; k < which.size(); ++k) {
      const RankingRow& r = rows[which[k]];
      const bool meets = engine::meets_coverage(r.worst_inf, level);
      const char* colour = line_colours[r.method % line_colours.size()];
      svg.element("circle", {{"class", "point"},
                             {"cx", px(at[k].first)},
                             {"cy", px(at[k].second)},
                             {"r", px(radius)},
                             {"fill", meets ? colour : "#ffffff"},
                             {"stroke", meets ? "#111" : colour},
                             {"stroke-width", meets ? "0.6" : "2"},
                             {"data-method", cube_.methods[r.method]},
                             {"data-x", exact(r.mean_width)},
                             {"data-y", exact(r.worst_inf)},
                             {"data-panel", panel},
                             {"data-meets-nominal", meets ? "yes" : "no"}});
    }
    for (std::size_t k = 0; k < which.size(); ++k)
      svg.text(spots[k].x, spots[k].baseline, labels[k],
               {{"class", "point-label"}, {"data-method", labels[k]}, {"data-box", box_text(spots[k].box)}});
  };
  // The dashed line is kept clear too, so that no label is struck through.
  draw_panel(near, y, "main", {nominal_box, svg::Box{x.from, y(level) - 0.5, x.to, y(level) + 0.5}});
  if (broken) draw_panel(far, y_far, "strip", {});

  std::string caption =
      exact_
          ? "One point per method: the mean over n of the grid mean width against the worst case, the "
            "smallest exact infimum of coverage over the continuous p range at any n of the cube. Filled "
            "points meet the nominal level everywhere (within 1e-10, the rule audit uses); hollow points "
            "fall "
            "below the dashed line somewhere; further left is narrower."
          : "One point per method: the mean over n of the simulated grid mean width against the smallest "
            "simulated grid coverage at any n (a Monte Carlo minimum, biased low by the simulation noise). "
            "Filled points reach the nominal level everywhere (within 1e-10), hollow points fall short of it "
            "somewhere.";
  if (broken)
    caption += fmt::format(
        " The vertical axis is broken: methods whose worst case is below nominal − 4α ({:g} %) are drawn in "
        "the strip below the main panel, on a scale of their own, so that the methods near nominal keep the "
        "main panel's height.",
        100 * far_threshold);
  caption += " Labels that could not sit beside their point are joined to it by a thin line.";
  return "<figure>\n" + svg.finish() + "<figcaption>" + escape(caption) + "</figcaption>\n</figure>\n";
}

std::string Report::summary_table(const Combo& c, const std::vector<std::size_t>& present) const {
  std::vector<std::string> head = {"method", "n", "mean coverage %", "min coverage %", "at p"};
  if (exact_) head.insert(head.end(), {"infimum %", "at p", "mean over p range %"});
  head.insert(head.end(), {"RMS deviation (points)", "p below nominal %", "mean width", "miss low (U < p) %",
                           "miss high (L > p) %"});
  if (!exact_) head.insert(head.end(), {"largest SE (points)"});
  std::string out = "<table class=\"summary\">\n" + html_head_row(head);
  for (std::size_t m : present)
    for (std::size_t ni : n_index_) {
      std::vector<std::pair<std::string, double>> cells = {{cube_.methods[m], nan},
                                                           {std::to_string(cube_.n[ni]), nan}};
      auto num = [&](const std::string& name, int kind) {
        const double v = stat(name, c, m, ni);
        cells.emplace_back(kind == 0 ? pct(v) : kind == 1 ? fmt::format("{:.4g}", v) : fixed(v, 4), v);
      };
      num("mean_coverage", 0);
      num("min_coverage", 0);
      num("min_coverage_p", 1);
      if (exact_) {
        num("inf_coverage", 0);
        num("inf_coverage_p", 1);
        num("mean_coverage_continuous", 0);
      }
      num("rms_deviation", 0);
      num("share_below", 0);
      num("mean_width", 2);
      num("mean_miss_low", 0);
      num("mean_miss_high", 0);
      if (!exact_) {
        double se = nan;
        for (double v : row("coverage_se", c, m, ni))
          if (!std::isnan(v) && (std::isnan(se) || v > se)) se = v;
        cells.emplace_back(pct(se, 3), se);
      }
      out += html_table_row(cells);
    }
  out += "</table>\n";
  std::string note =
      exact_ ? "Grid figures are over the cube's p values; the infimum is the exact infimum of coverage over "
               "the "
               "continuous range of p between the grid's ends, and the mean over that range is exact under a "
               "uniform p. RMS deviation is from the nominal level."
             : "Monte Carlo estimates over the cube's p values; the largest SE is the biggest standard error "
               "of a "
               "coverage estimate at that n.";
  note += " Every n is in the CSV tables that covergrid run writes beside the cube.";
  return out + "<p>" + escape(note) + "</p>\n";
}

std::string Report::ranking_table(const Combo& c, const std::vector<RankingRow>& rows) const {
  const double level = cube_.levels[c.level];
  std::string out = "<table class=\"ranking\">\n";
  out +=
      html_head_row({"#", "method", exact_ ? "worst (exact infimum) %" : "worst (simulated) %",
                     "meets nominal", "at n", exact_ ? "mean coverage (continuous p) %" : "mean coverage %",
                     "RMS deviation (points)", "p below nominal %", "mean width"});
  for (const auto& r : rows)
    out += html_table_row({{std::to_string(r.rank), nan},
                           {cube_.methods[r.method] + (r.simulated ? " (simulated only)" : ""), nan},
                           {pct(r.worst_inf), r.worst_inf},
                           {engine::meets_coverage(r.worst_inf, level) ? "yes" : "no", nan},
                           {std::to_string(r.worst_inf_n), static_cast<double>(r.worst_inf_n)},
                           {pct(r.mean_coverage), r.mean_coverage},
                           {pct(r.rms_deviation), r.rms_deviation},
                           {pct(r.share_below), r.share_below},
                           {fixed(r.mean_width, 4), r.mean_width}});
  out += "</table>\n";
  // The same order and column meanings as the headline and `covergrid rank`.
  return out + "<p>" + escape(ranking_footnote(exact_, has_simulated_rows(rows))) +
         " \u201cMeets nominal\u201d: the worst case reaches the nominal level within 1e-10, the rule "
         "every command judges coverage by.</p>\n";
}

/// Removes a temporary file unless it was renamed into place.
class TempFile {
 public:
  explicit TempFile(std::string path) : path_(std::move(path)) {}
  ~TempFile() {
    if (!committed_) {
      std::error_code ec;
      fs::remove(path_, ec);
    }
  }
  TempFile(const TempFile&) = delete;
  TempFile& operator=(const TempFile&) = delete;
  const std::string& path() const { return path_; }
  void commit() { committed_ = true; }

 private:
  std::string path_;
  bool committed_ = false;
};

}  // namespace

std::size_t coverage_class(double coverage, double level) {
  return heat_class(coverage, level, class_bounds(level));
}

std::vector<std::size_t> report_n_indices(const CubeReader& cube, const std::vector<std::int64_t>& n) {
  std::vector<std::size_t> out;
  const std::size_t N = cube.n.size();
  if (N == 0) throw InputError(cube.path(), "has an empty n axis");
  if (n.empty()) {
    if (N <= max_auto_n) {
      for (std::size_t i = 0; i < N; ++i) out.push_back(i);
    } else {
      for (std::size_t k = 0; k < max_auto_n; ++k)
        out.push_back((k * (N - 1) + (max_auto_n - 1) / 2) / (max_auto_n - 1));
    }
    return out;
  }
  for (std::int64_t v : n) {
    const auto at = std::find(cube.n.begin(), cube.n.end(), v);
    if (at == cube.n.end())
      throw InputError("--n", fmt::format("n = {} is not on the n axis of {} ({} values from {} to {})", v,
                                          cube.path(), N, cube.n.front(), cube.n.back()));
    const auto i = static_cast<std::size_t>(at - cube.n.begin());
    if (std::find(out.begin(), out.end(), i) != out.end())
      throw InputError("--n", fmt::format("n = {} is given twice", v));
    out.push_back(i);
  }
  std::sort(out.begin(), out.end());
  return out;
}

std::string file_sha256(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) throw InputError(path, "cannot be read");
  engine::Sha256 h;
  std::vector<char> buffer(std::size_t{1} << 20);
  while (in) {
    in.read(buffer.data(), static_cast<std::streamsize>(buffer.size()));
    const auto got = in.gcount();
    if (got > 0) h.update(std::string_view(buffer.data(), static_cast<std::size_t>(got)));
  }
  if (in.bad()) throw InputError(path, "cannot be read");
  return h.hex_digest();
}

void write_report(const CubeReader& cube, const ReportOptions& options, const std::string& html_path) {
  if (options.max_bins < 2 || options.max_bins > 1000)
    throw InputError("--max-bins", fmt::format("{} is outside 2..1000", options.max_bins));
  if (options.max_points < 2) throw InputError("report options", "max_points must be at least 2");
  if (!cube.complete())
    throw InputError(cube.path(),
                     "is not complete (an unfinished run or one shard of a run); finish the run or merge the "
                     "shards first");
  if (!cube.has_exact() && !cube.has_mc())
    throw InputError(cube.path(), "holds neither exact nor Monte Carlo results");
  report_n_indices(cube, options.n);

  const fs::path out_path(html_path);
  if (html_path.empty()) throw InputError("-o", "give the report's file name");
  const fs::path parent = out_path.parent_path().empty() ? fs::path(".") : out_path.parent_path();
  std::error_code ec;
  if (!fs::is_directory(parent, ec))
    throw InputError(html_path, fmt::format("its folder {} does not exist", parent.string()));
  const auto status = fs::status(out_path, ec);
  if (fs::is_directory(status)) throw InputError(html_path, "is a folder, not a file name");
  if (fs::exists(status)) {
    if (fs::equivalent(out_path, fs::path(cube.path()), ec))
      throw InputError(html_path, "is the cube itself; choose another file name for the report");
    // Only an earlier report is replaced; any other file is left alone.
    std::ifstream old(html_path, std::ios::binary);
    std::string head(1024, '\0');
    old.read(head.data(), static_cast<std::streamsize>(head.size()));
    head.resize(static_cast<std::size_t>(old.gcount()));
    if (head.find(generator_meta) == std::string::npos)
      throw InputError(html_path, "exists and is not a covergrid report; not replacing it");
  }

  // Claim the temporary name first, so that an unwritable folder fails before the work.
  TempFile temp(html_path + ".partial");
  std::ofstream out(temp.path(), std::ios::binary | std::ios::trunc);
  if (!out)
    throw InputError(html_path,
                     fmt::format("cannot write in its folder {}: {}", parent.string(), std::strerror(errno)));
  std::string page;
  try {
    page = Report(cube, options).html();
  } catch (const CubeError& e) {
    throw InputError(cube.path(), std::string("is damaged: ") + e.what());
  }
  out << page;
  out.flush();
  if (!out)
    throw InputError(html_path, fmt::format("cannot write {}: {}", temp.path(), std::strerror(errno)));
  out.close();
  fs::rename(temp.path(), out_path, ec);
  if (ec) throw InputError(html_path, "cannot rename the finished report into place: " + ec.message());
  temp.commit();
}

}  // namespace covergrid::output
