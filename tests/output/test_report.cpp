// The HTML report (output/report.hpp): what the page holds for an exact and
// a simulated-only cube, every drawn value checked against the cube bit for
// bit (curves, thinned curves, binned heat maps, the trade-off points), text
// escaped, the page a pure function of the cube, and bad input (incomplete,
// damaged, missing or foreign cubes, n not on the axis, unusable output
// paths) refused with InputError and no file left behind.
#include "support.hpp"

#include "covergrid/cli/cli.hpp"
#include "covergrid/engine/coverage_rule.hpp"
#include "covergrid/engine/error.hpp"
#include "covergrid/engine/sha256.hpp"
#include "covergrid/output/cube.hpp"
#include "covergrid/output/hdf5.hpp"
#include "covergrid/output/report.hpp"
#include "covergrid/output/svg.hpp"
#include "covergrid/output/tables.hpp"

#include <catch2/catch.hpp>

#include <algorithm>
#include <cctype>
#include <cmath>
#include <cstdlib>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <map>
#include <sstream>
#include <stdexcept>

namespace e = covergrid::engine;
namespace o = covergrid::output;
namespace fs = std::filesystem;
namespace svg = covergrid::output::svg;
using covergrid::test::scenario_from;
using covergrid::test::ScratchDir;

namespace {

// Title, model and a method label with characters that must be escaped.
const char* exact_text = R"(
title = "Sensor lot <B> & \"spare\" parts"
seed = 31
[grid]
n = { from = 2, to = 12 }
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
label = "plain <jeffreys> & 'co'"
[[model]]
kind = "binomial"
label = "bin & co"
[output]
cube = "c.h5"
tables = ""
)";

const char* mc_text = R"(
title = "simulated only"
seed = 4242
[grid]
n = [5, 20]
p = { from = 0.05, to = 0.95, count = 19 }
levels = [0.95]
[evaluate]
exact = false
replicates = 2000
[[method]]
id = "wald"
[[method]]
id = "clopper-pearson"
[output]
cube = "mc.h5"
tables = ""
)";

void run_to_cube(const e::Scenario& s) {
  const auto state = o::inspect_output(s, false);
  const auto plan = e::make_plan(s);
  o::CubeWriter w(s, plan, state == o::OutputState::resumed);
  e::run_scenario(s, w);
}

std::string slurp(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  return std::string(std::istreambuf_iterator<char>(in), {});
}

std::string unescape(std::string s) {
  const std::pair<const char*, const char*> entities[] = {
      {"&lt;", "<"}, {"&gt;", ">"}, {"&quot;", "\""}, {"&#39;", "'"}, {"&amp;", "&"}};
  for (const auto& [from, to] : entities)
    for (std::size_t at = 0; (at = s.find(from, at)) != std::string::npos; at += std::strlen(to))
      s.replace(at, std::strlen(from), to);
  return s;
}

using Element = std::map<std::string, std::string>;

/// Every start tag of the page in document order: its name under "", its
/// attributes (unescaped) under their names. A scanner of our own (the page
/// escapes '<', '>' and '"' inside text and attribute values).
std::vector<Element> start_tags(const std::string& html) {
  std::vector<Element> out;
  for (std::size_t at = html.find('<'); at != std::string::npos; at = html.find('<', at + 1)) {
    if (at + 1 >= html.size() || !std::isalpha(static_cast<unsigned char>(html[at + 1]))) continue;
    std::size_t i = at + 1;
    Element el;
    while (i < html.size() && std::isalnum(static_cast<unsigned char>(html[i]))) el[""] += html[i++];
    while (i < html.size() && html[i] != '>') {
      if (std::isspace(static_cast<unsigned char>(html[i])) || html[i] == '/') {
        ++i;
        continue;
      }
      const std::size_t eq = html.find('=', i);
      const std::size_t open = eq + 1, close = html.find('"', open + 1);
      if (eq == std::string::npos || html[open] != '"' || close == std::string::npos)
        throw std::runtime_error("malformed attribute at offset " + std::to_string(i));
      el[html.substr(i, eq - i)] = unescape(html.substr(open + 1, close - open - 1));
      i = close + 1;
    }
    out.push_back(std::move(el));
  }
  return out;
}

/// The start tags `<tag ...>` whose class attribute begins with `cls`.
std::vector<Element> elements(const std::string& html, const std::string& tag, const std::string& cls) {
  std::vector<Element> out;
  for (auto& el : start_tags(html))
    if (el[""] == tag && el["class"].rfind(cls, 0) == 0) out.push_back(el);
  return out;
}

std::vector<double> numbers(const std::string& text) {
  std::vector<double> out;
  std::istringstream in(text);
  std::string word;
  while (in >> word) out.push_back(std::strtod(word.c_str(), nullptr));
  return out;
}

bool same_bits(double a, double b) { return std::memcmp(&a, &b, sizeof a) == 0; }

std::size_t index_of(const std::vector<std::string>& v, const std::string& x) {
  const auto it = std::find(v.begin(), v.end(), x);
  REQUIRE(it != v.end());
  return static_cast<std::size_t>(it - v.begin());
}

std::size_t level_index(const o::CubeReader& cube, double level) {
  for (std::size_t i = 0; i < cube.levels.size(); ++i)
    if (same_bits(cube.levels[i], level)) return i;
  FAIL("level not on the axis");
  return 0;
}

std::size_t n_index(const o::CubeReader& cube, std::int64_t n) {
  const auto it = std::find(cube.n.begin(), cube.n.end(), n);
  REQUIRE(it != cube.n.end());
  return static_cast<std::size_t>(it - cube.n.begin());
}

/// Checks every series of the page against the cube; returns how many there were.
std::size_t check_series(const o::CubeReader& cube, const std::string& html, const std::string& source,
                         std::size_t max_points) {
  const auto series = elements(html, "polyline", "series");
  for (const auto& s : series) {
    INFO(s.at("data-kind") << " " << s.at("data-method") << " n = " << s.at("data-n"));
    CHECK(s.at("data-source") == source);
    const std::size_t mo = index_of(cube.models, s.at("data-model"));
    const std::size_t side = index_of(cube.sides, s.at("data-side"));
    const std::size_t level = level_index(cube, std::strtod(s.at("data-level").c_str(), nullptr));
    const std::size_t m = index_of(cube.methods, s.at("data-method"));
    const std::size_t ni = n_index(cube, std::stoll(s.at("data-n")));
    const auto row = cube.rows(source, s.at("data-kind"), mo, side, level, m, ni, 1);
    const auto idx = numbers(s.at("data-p-index"));
    const auto values = numbers(s.at("data-values"));
    REQUIRE(idx.size() == values.size());
    CHECK(values.size() <= max_points);
    if (cube.p.size() <= max_points) CHECK(values.size() == cube.p.size());  // no NaN in a defined row
    for (std::size_t k = 0; k < idx.size(); ++k) {
      const auto i = static_cast<std::size_t>(idx[k]);
      if (k) CHECK(idx[k] > idx[k - 1]);  // plot order is p order
      CHECK(same_bits(values[k], row[i]));
    }
    // A thinned curve keeps the row's extremes.
    CHECK(std::find(values.begin(), values.end(), *std::min_element(row.begin(), row.end())) != values.end());
    CHECK(std::find(values.begin(), values.end(), *std::max_element(row.begin(), row.end())) != values.end());
    // The drawn points: as many as the values, x increasing.
    std::vector<double> xs;
    std::istringstream pts(s.at("points"));
    std::string pair;
    while (pts >> pair) xs.push_back(std::strtod(pair.c_str(), nullptr));
    CHECK(xs.size() == values.size());
    CHECK(std::is_sorted(xs.begin(), xs.end()));
    if (source == "mc" && s.at("data-kind") == "coverage") {
      const auto se = numbers(s.at("data-se"));
      const auto se_row = cube.rows("mc", "coverage_se", mo, side, level, m, ni, 1);
      REQUIRE(se.size() == idx.size());
      for (std::size_t k = 0; k < idx.size(); ++k)
        CHECK(same_bits(se[k], se_row[static_cast<std::size_t>(idx[k])]));
    }
  }
  return series.size();
}

/// Checks every heat-map row against the minimum over its bins, computed here from the cube's rows.
std::size_t check_heat_maps(const o::CubeReader& cube, const std::string& html, const std::string& source) {
  // Legend keys, maps and rows in document order: a section's legend comes before its maps,
  // and each heat-row belongs to the last heat-map before it.
  std::map<std::string, std::pair<double, double>> classes;
  std::size_t rows_checked = 0;
  Element map;
  std::vector<double> row_min;
  for (Element& el : start_tags(html)) {
    const bool wanted =
        (el[""] == "g" && el["class"].rfind("heat-", 0) == 0) ||
        (el[""] == "rect" && (el.count("data-bins") || el["class"].rfind("heat-key", 0) == 0));
    if (!wanted) continue;
    if (el["class"].rfind("heat-key", 0) == 0) {
      if (el.count("data-lo"))  // the "no value" key has no range
        classes[el.at("class").substr(9)] = {std::strtod(el.at("data-lo").c_str(), nullptr),
                                             std::strtod(el.at("data-hi").c_str(), nullptr)};
      continue;
    }
    if (el["class"] == "heat-map") {
      CHECK(classes.size() == 8);
      map = el;
      continue;
    }
    const std::size_t mo = index_of(cube.models, map.at("data-model"));
    const std::size_t side = index_of(cube.sides, map.at("data-side"));
    const double level_value = std::strtod(map.at("data-level").c_str(), nullptr);
    const std::size_t level = level_index(cube, level_value);
    const std::size_t m = index_of(cube.methods, map.at("data-method"));
    if (el["class"] == "heat-row") {
      const auto range = numbers(el.at("data-n-range"));
      const std::size_t n0 = n_index(cube, static_cast<std::int64_t>(range.at(0)));
      const std::size_t n1 = n_index(cube, static_cast<std::int64_t>(range.at(1)));
      row_min = numbers(el.at("data-values"));
      std::istringstream bins(map.at("data-p-bins"));
      std::string bin;
      std::size_t b = 0;
      const auto block = cube.rows(source, "coverage", mo, side, level, m, n0, n1 - n0 + 1);
      const std::size_t P = cube.p.size();
      while (bins >> bin) {
        const auto colon = bin.find(':');
        const double p0 = std::strtod(bin.substr(0, colon).c_str(), nullptr);
        const double p1 = std::strtod(bin.substr(colon + 1).c_str(), nullptr);
        const auto j0 =
            static_cast<std::size_t>(std::find(cube.p.begin(), cube.p.end(), p0) - cube.p.begin());
        const auto j1 =
            static_cast<std::size_t>(std::find(cube.p.begin(), cube.p.end(), p1) - cube.p.begin());
        REQUIRE(j1 < P);
        double want = HUGE_VAL;
        for (std::size_t i = 0; i <= n1 - n0; ++i)
          for (std::size_t j = j0; j <= j1; ++j) want = std::min(want, block[i * P + j]);
        REQUIRE(b < row_min.size());
        CHECK(same_bits(row_min[b], want));
        ++b;
      }
      CHECK(b == row_min.size());
      ++rows_checked;
    } else {
      // A run of bins of one colour class: every bin reaches the class's lower
      // edge and not its upper one, edges at or below nominal judged by the
      // shared rule (nominal + edge - 1e-10), edges above by the plain deviation.
      const auto bins = numbers(el.at("data-bins"));
      const auto [lo, hi] = classes.at(el.at("class"));
      const auto reaches = [&](double v, double edge) {
        if (std::isinf(edge)) return edge < 0;
        return edge <= 0 ? v >= level_value + edge - 1e-10 : v - level_value >= edge;
      };
      for (auto b = static_cast<std::size_t>(bins.at(0)); b <= static_cast<std::size_t>(bins.at(1)); ++b) {
        CHECK(reaches(row_min.at(b), lo));
        CHECK_FALSE(reaches(row_min.at(b), hi));
      }
    }
  }
  return rows_checked;
}

}  // namespace

TEST_CASE("the report of an exact cube carries the cube's values", "[output][report]") {
  ScratchDir dir("report");
  const auto s = scenario_from(exact_text, dir.path().string());
  run_to_cube(s);
  const o::CubeReader cube(s.cube_path);
  o::ReportOptions opt;
  opt.max_bins = 4;     // 11 n and 49 p binned down to 4 x 4
  opt.max_points = 20;  // 49 p thinned
  const std::string html_path = dir.file("report.html");
  o::write_report(cube, opt, html_path);
  const std::string html = slurp(html_path);
  CHECK_FALSE(fs::exists(html_path + ".partial"));

  CHECK(html.rfind("<!DOCTYPE html>\n<html xmlns=\"http://www.w3.org/1999/xhtml\"", 0) == 0);
  CHECK(html.find("<script") == std::string::npos);
  CHECK(html.find("Sensor lot &lt;B&gt; &amp; &quot;spare&quot; parts") != std::string::npos);
  CHECK(html.find("Sensor lot <B>") == std::string::npos);
  CHECK(html.find(e::sha256_hex(slurp(s.cube_path))) != std::string::npos);
  CHECK(html.find(s.sha256) != std::string::npos);
  CHECK(html.find("long-run property") != std::string::npos);
  CHECK(html.find("qualified statistician") != std::string::npos);
  // One section per (model, side, level); blaker left out of the one-sided ones with a note.
  for (const char* id : {"s0-0-0", "s0-0-1", "s0-1-0", "s0-1-1"})
    CHECK(html.find(std::string("<section class=\"combo\" id=\"") + id + "\">") != std::string::npos);
  std::size_t notes = 0;
  for (std::size_t at = 0;
       (at = html.find("Left out: blaker does not define the upper-bound side", at)) != std::string::npos;
       ++at)
    ++notes;
  CHECK(notes == 2);

  // Automatic n: six spread over the eleven of the axis (both ends included).
  CHECK(o::report_n_indices(cube, {}) == std::vector<std::size_t>{0, 2, 4, 6, 8, 10});
  const std::size_t series = check_series(cube, html, "exact", opt.max_points);
  // Per level, coverage and width at 6 n: 3 methods two-sided, 2 (no blaker) upper-bound.
  CHECK(series == 2 * (3 * 6 * 2) + 2 * (2 * 6 * 2));
  const auto covers = elements(html, "polyline", "series");
  CHECK(std::count_if(covers.begin(), covers.end(), [](const Element& el) {
          return el.at("data-method") == "plain <jeffreys> & 'co'";
        }) == 4 * 6 * 2);
  // Heat maps: 4 n bins per map, maps = 3 + 3 + 2 + 2.
  CHECK(check_heat_maps(cube, html, "exact") == 4 * 10);

  // Trade-off points are the ranking's figures.
  const auto rank = o::ranking(cube);
  const auto points = elements(html, "circle", "point");
  REQUIRE(points.size() == rank.size());
  for (std::size_t i = 0; i < rank.size(); ++i) {
    CHECK(points[i].at("data-method") == cube.methods[rank[i].method]);
    CHECK(same_bits(std::strtod(points[i].at("data-x").c_str(), nullptr), rank[i].mean_width));
    CHECK(same_bits(std::strtod(points[i].at("data-y").c_str(), nullptr), rank[i].worst_inf));
  }
  // The page depends on the cube alone: a second report is the same bytes.
  o::write_report(cube, opt, dir.file("again.html"));
  CHECK(slurp(dir.file("again.html")) == html);
}

namespace {

// Small samples down to p = 0.005, where Wald's worst case collapses to a few
// percent (far below nominal - 4 alpha) while the others stay near nominal,
// and several methods share nearly the same point.
const char* crowded_text = R"(
title = "crowded trade-off"
seed = 7
[grid]
n = { from = 8, to = 14 }
p = { from = 0.005, to = 0.5, count = 60 }
levels = [0.9, 0.95]
[[method]]
id = "wald"
[[method]]
id = "wilson"
[[method]]
id = "agresti-coull"
[[method]]
id = "clopper-pearson"
[[method]]
id = "mid-p"
[[method]]
id = "jeffreys"
[[method]]
id = "blaker"
[[method]]
id = "jeffreys"
label = "jeffreys-again"
[[method]]
id = "wilson"
label = "wilson-twin"
[output]
cube = "crowded.h5"
tables = ""
)";

/// The start tags of each <svg class="cls"> of the page (the element first), one list per svg.
std::vector<std::vector<Element>> svgs_of(const std::string& html, const std::string& cls) {
  std::vector<std::vector<Element>> out;
  const std::string open = "<svg xmlns=\"http://www.w3.org/2000/svg\"";
  for (std::size_t at = html.find(open); at != std::string::npos; at = html.find(open, at + 1)) {
    const std::size_t head_end = html.find('>', at);
    if (html.substr(at, head_end - at).find("class=\"" + cls + "\"") == std::string::npos) continue;
    // Count nested <svg> viewports to find the matching end.
    std::size_t depth = 0, i = at;
    for (;;) {
      const std::size_t o = html.find("<svg", i + 1), c = html.find("</svg>", i + 1);
      if (o < c) {
        ++depth;
        i = o;
      } else if (depth > 0) {
        --depth;
        i = c;
      } else {
        out.push_back(start_tags(html.substr(at, c - at)));
        break;
      }
    }
  }
  return out;
}

covergrid::output::svg::Box text_box_of(const Element& el) {
  const auto anchor = el.count("text-anchor") ? el.at("text-anchor") : std::string("start");
  return covergrid::output::svg::text_box(std::strtod(el.at("x").c_str(), nullptr),
                                          std::strtod(el.at("y").c_str(), nullptr), el.at("data-method"), 11,
                                          anchor);
}

}  // namespace

TEST_CASE(
    "the trade-off plot: labels clear of each other, the points and the edges; far-off methods on a "
    "broken axis",
    "[output][report][labels]") {
  ScratchDir dir("report-crowded");
  const auto s = scenario_from(crowded_text, dir.path().string());
  run_to_cube(s);
  const o::CubeReader cube(s.cube_path);
  o::write_report(cube, {}, dir.file("r.html"));
  const std::string html = slurp(dir.file("r.html"));
  const auto rank = o::ranking(cube);
  const auto plots = svgs_of(html, "tradeoff");
  REQUIRE(plots.size() == 2);  // one per level
  std::size_t labels_checked = 0;
  for (const auto& tags : plots) {
    const double w = std::strtod(tags[0].at("width").c_str(), nullptr);
    const double h = std::strtod(tags[0].at("height").c_str(), nullptr);
    CHECK(tags[0].at("viewBox") == "0 0 " + tags[0].at("width") + " " + tags[0].at("height"));
    const svg::Box view{0, 0, w, h};
    std::vector<svg::Box> labels, markers;
    std::vector<Element> points;
    const Element* nominal = nullptr;
    const Element* axis_break = nullptr;
    for (const auto& el : tags) {
      if (el.at("") == "circle" && el.at("class") == "point") {
        const double cx = std::strtod(el.at("cx").c_str(), nullptr),
                     cy = std::strtod(el.at("cy").c_str(), nullptr),
                     r = std::strtod(el.at("r").c_str(), nullptr);
        markers.push_back({cx - r, cy - r, cx + r, cy + r});
        points.push_back(el);
      }
      if (el.at("") == "text" && el.at("class") == "point-label") labels.push_back(text_box_of(el));
      if (el.at("") == "text" && el.at("class") == "nominal-label") nominal = &el;
      if (el.at("") == "g" && el.at("class") == "axis-break") axis_break = &el;
    }
    REQUIRE(labels.size() == cube.methods.size());
    REQUIRE(points.size() == cube.methods.size());
    REQUIRE(nominal != nullptr);
    const auto nominal_box = numbers(nominal->at("data-box"));
    const svg::Box nb{nominal_box.at(0), nominal_box.at(1), nominal_box.at(2), nominal_box.at(3)};
    CHECK(nb.inside(view));
    for (std::size_t i = 0; i < labels.size(); ++i) {
      INFO("label of " << points[i].at("data-method"));
      CHECK(labels[i].inside(view));
      CHECK_FALSE(labels[i].overlaps(nb));
      for (std::size_t j = 0; j < labels.size(); ++j)
        if (j != i) CHECK_FALSE(labels[i].overlaps(labels[j]));
      for (const auto& m : markers) CHECK_FALSE(labels[i].overlaps(m));
      ++labels_checked;
    }
    // Wald is far off: in the strip below the broken axis, its value still carried in full.
    REQUIRE(axis_break != nullptr);
    const double threshold = std::strtod(axis_break->at("data-threshold").c_str(), nullptr);
    double lowest_main = 0;
    for (const auto& p : points)
      if (p.at("data-panel") == "main")
        lowest_main = std::max(lowest_main, std::strtod(p.at("cy").c_str(), nullptr));
    std::size_t in_strip = 0;
    for (const auto& p : points) {
      const double y = std::strtod(p.at("data-y").c_str(), nullptr);
      CHECK((p.at("data-panel") == "strip") == !e::meets_coverage(y, threshold));
      if (p.at("data-panel") == "strip") {
        ++in_strip;
        CHECK(p.at("data-method") == "wald");
        CHECK(std::strtod(p.at("cy").c_str(), nullptr) > lowest_main + 30);
        const std::size_t m = index_of(cube.methods, "wald");
        bool found = false;
        for (const auto& r : rank)
          if (r.method == m && same_bits(r.worst_inf, y)) found = true;
        CHECK(found);
      }
    }
    CHECK(in_strip == 1);
  }
  CHECK(labels_checked == 2 * cube.methods.size());
  CHECK(html.find("The vertical axis is broken") != std::string::npos);
  CHECK(html.find("vertical axis broken") != std::string::npos);

  // Filled points and the ranking's "meets nominal" follow the shared rule, and
  // the cube has a method whose worst case is a rounding error below nominal
  // (Blaker's infimum equals nominal in theory): it meets it.
  const auto points = elements(html, "circle", "point");
  REQUIRE(points.size() == rank.size());
  std::size_t rounding_below = 0;
  for (std::size_t i = 0; i < rank.size(); ++i) {
    const double level = cube.levels[rank[i].level];
    const bool meets = rank[i].worst_inf >= level - 1e-10;
    CHECK(points[i].at("data-meets-nominal") == (meets ? "yes" : "no"));
    if (rank[i].worst_inf < level && meets) ++rounding_below;
  }
  CHECK(rounding_below >= 1);
}

TEST_CASE("coverage panels are large enough to read and use the page width", "[output][report]") {
  ScratchDir dir("report-panels");
  const auto s = scenario_from(exact_text, dir.path().string());
  run_to_cube(s);
  const o::CubeReader cube(s.cube_path);
  for (const std::vector<std::int64_t>& n :
       {std::vector<std::int64_t>{}, std::vector<std::int64_t>{2, 7, 12}, std::vector<std::int64_t>{5}}) {
    o::ReportOptions opt;
    opt.n = n;
    o::write_report(cube, opt, dir.file("r.html"));
    const std::string html = slurp(dir.file("r.html"));
    const auto areas = elements(html, "svg", "plot-area");
    const std::size_t drawn = n.empty() ? 6 : n.size();
    // Per level, 3 methods two-sided and 2 upper-bound, one plot area per (method, n).
    CHECK(areas.size() == 2 * (3 + 2) * drawn);
    for (const auto& a : areas) {
      CHECK(a.at("data-kind") == "coverage");
      CHECK(std::strtod(a.at("width").c_str(), nullptr) >= 300);
      CHECK(std::strtod(a.at("height").c_str(), nullptr) >= 160);
    }
    // One SVG per method (print breaks pages between them), as wide as the page's content.
    const auto panels = elements(html, "svg", "coverage-panels");
    CHECK(panels.size() == 2 * (3 + 2));
    for (const auto& p : panels) {
      const double w = std::strtod(p.at("width").c_str(), nullptr);
      CHECK(w <= 1120);
      CHECK(w >= 1110);
    }
  }
}

TEST_CASE("heat-map classes judge coverage by the shared rule", "[output][report]") {
  // alpha = 0.1 at 90 %: classes edges at -0.4, -0.2, -0.1, -0.05, -0.02, +0.02, +0.05.
  CHECK(o::coverage_class(0.9, 0.9) == 5);
  CHECK(o::coverage_class(0.89999999999999969, 0.9) == 5);
  // Within the 1e-10 slack below the edge nominal - alpha/5: still within +-alpha/5.
  CHECK(o::coverage_class(0.9 - 0.02 - 5e-11, 0.9) == 5);
  CHECK(o::coverage_class(0.9 - 0.02 - 1e-9, 0.9) == 4);
  CHECK(o::coverage_class(0.5 - 5e-11, 0.9) == 1);
  CHECK(o::coverage_class(0.5 - 1e-9, 0.9) == 0);
  CHECK(o::coverage_class(0.0, 0.9) == 0);
  // Above nominal the plain deviation decides (nothing is "met" there).
  CHECK(o::coverage_class(0.9 + 0.02 + 1e-12, 0.9) == 6);
  CHECK(o::coverage_class(0.9 + 0.02 - 1e-12, 0.9) == 5);
  CHECK(o::coverage_class(1.0, 0.9) == 7);
  CHECK(o::coverage_class(std::nan(""), 0.9) == 8);
  CHECK(o::coverage_class(0.95 - 0.01 - 5e-11, 0.95) == 5);
}

TEST_CASE("chosen n and default options", "[output][report]") {
  ScratchDir dir("report-n");
  const auto s = scenario_from(exact_text, dir.path().string());
  run_to_cube(s);
  const o::CubeReader cube(s.cube_path);
  o::ReportOptions opt;
  opt.n = {12, 3};
  CHECK(o::report_n_indices(cube, opt.n) == std::vector<std::size_t>{1, 10});
  o::write_report(cube, opt, dir.file("r.html"));
  const std::string html = slurp(dir.file("r.html"));
  // Unthinned and unbinned: every p, one heat row per n.
  check_series(cube, html, "exact", cube.p.size());
  CHECK(check_heat_maps(cube, html, "exact") == 10 * 11);
  for (const auto& el : elements(html, "polyline", "series"))
    CHECK((el.at("data-n") == "3" || el.at("data-n") == "12"));
}

TEST_CASE("the report of a simulated-only cube draws the Monte Carlo values", "[output][report]") {
  ScratchDir dir("report-mc");
  const auto s = scenario_from(mc_text, dir.path().string());
  run_to_cube(s);
  const o::CubeReader cube(s.cube_path);
  REQUIRE_FALSE(cube.has_exact());
  o::write_report(cube, {}, dir.file("mc.html"));
  const std::string html = slurp(dir.file("mc.html"));
  CHECK(check_series(cube, html, "mc", 200) == 2 * 2 * 2);
  CHECK(check_heat_maps(cube, html, "mc") == 2 * 2);
  CHECK(html.find("Simulated: every figure") != std::string::npos);
  CHECK(html.find("2000 replicates per cell") != std::string::npos);
  CHECK(html.find("largest SE") != std::string::npos);
  CHECK(html.find("data-se=") != std::string::npos);
  CHECK(html.find("data-source=\"exact\"") == std::string::npos);
}

TEST_CASE("bad input to the report is refused and leaves no file", "[output][report][bad-input]") {
  ScratchDir dir("report-bad");
  const auto s = scenario_from(exact_text, dir.path().string());
  run_to_cube(s);
  const std::string out = dir.file("r.html");
  auto nothing_written = [&](const std::string& path) {
    CHECK_FALSE(fs::exists(path));
    CHECK_FALSE(fs::exists(path + ".partial"));
  };
  {
    const o::CubeReader cube(s.cube_path);
    o::ReportOptions opt;
    opt.n = {7, 13};
    CHECK_THROWS_WITH(o::write_report(cube, opt, out),
                      Catch::StartsWith("--n: n = 13 is not on the n axis of") && Catch::Contains("2 to 12"));
    opt.n = {4, 4};
    CHECK_THROWS_WITH(o::write_report(cube, opt, out), Catch::Contains("n = 4 is given twice"));
    nothing_written(out);
    const std::string missing = dir.file("no-such-folder/r.html");
    CHECK_THROWS_WITH(o::write_report(cube, {}, missing), Catch::Contains("no-such-folder does not exist"));
    nothing_written(missing);
    // A folder that exists but takes no new files, even for root.
    CHECK_THROWS_WITH(o::write_report(cube, {}, "/proc/covergrid-report.html"),
                      Catch::StartsWith("/proc/covergrid-report.html: cannot write in its folder /proc"));
    nothing_written("/proc/covergrid-report.html");
    CHECK_THROWS_WITH(o::write_report(cube, {}, dir.path().string()), Catch::Contains("is a folder"));
    // The cube itself is never overwritten.
    const std::string before = slurp(s.cube_path);
    CHECK_THROWS_WITH(o::write_report(cube, {}, s.cube_path), Catch::Contains("is the cube itself"));
    CHECK(slurp(s.cube_path) == before);
    // An existing file that is not a report is left alone; an earlier report is replaced.
    std::ofstream(dir.file("notes.html")) << "<html>my notes</html>\n";
    CHECK_THROWS_WITH(o::write_report(cube, {}, dir.file("notes.html")),
                      Catch::Contains("exists and is not a covergrid report"));
    CHECK(slurp(dir.file("notes.html")) == "<html>my notes</html>\n");
    CHECK_FALSE(fs::exists(dir.file("notes.html.partial")));
    o::write_report(cube, {}, out);
    std::ofstream(out, std::ios::app) << "<!-- edited -->";
    o::write_report(cube, {}, out);
    CHECK(slurp(out).find("edited") == std::string::npos);
    fs::remove(out);
    o::ReportOptions bins;
    bins.max_bins = 1;
    CHECK_THROWS_WITH(o::write_report(cube, bins, out), Catch::StartsWith("--max-bins"));
    nothing_written(out);
  }
  // An incomplete cube (a run or shard not finished).
  const std::string partial = dir.file("partial.h5");
  fs::copy_file(s.cube_path, partial);
  {
    o::File f = o::File::open(partial, true);
    o::set_attr(f.id(), "complete", std::int64_t{0});
  }
  CHECK_THROWS_WITH(o::write_report(o::CubeReader(partial), {}, out),
                    Catch::StartsWith(partial + ": is not complete"));
  nothing_written(out);
  // A damaged cube: a metric the report draws is missing.
  const std::string damaged = dir.file("damaged.h5");
  fs::copy_file(s.cube_path, damaged);
  {
    o::File f = o::File::open(damaged, true);
    o::check(H5Ldelete(f.id(), "/exact/width", H5P_DEFAULT), "delete /exact/width");
  }
  CHECK_THROWS_WITH(o::write_report(o::CubeReader(damaged), {}, out),
                    Catch::StartsWith(damaged + ": is damaged"));
  nothing_written(out);
}

TEST_CASE("covergrid report: exit 2 on bad input, a page otherwise", "[output][report][cli]") {
  ScratchDir dir("report-cli");
  const auto s = scenario_from(exact_text, dir.path().string());
  run_to_cube(s);
  auto call = [](const std::vector<std::string>& args, std::string& err) {
    std::ostringstream o, e;
    const int status = covergrid::cli::run_cli(args, o, e);
    err = e.str();
    return status;
  };
  std::string err;
  const std::string out = dir.file("r.html");
  CHECK(call({"report", dir.file("missing.h5"), "-o", out}, err) == 2);
  CHECK_THAT(err, Catch::Contains("missing.h5: does not exist"));
  std::ofstream(dir.file("notes.h5")) << "not a cube\n";
  CHECK(call({"report", dir.file("notes.h5"), "-o", out}, err) == 2);
  CHECK_THAT(err, Catch::Contains("notes.h5: is not an HDF5 file"));
  CHECK(call({"report", s.cube_path, "-o", out, "--n", "2,99"}, err) == 2);
  CHECK_THAT(err, Catch::Contains("--n: n = 99 is not on the n axis"));
  CHECK(call({"report", s.cube_path, "-o", out, "--n", "two"}, err) == 2);
  CHECK(call({"report", s.cube_path, "-o", out, "--max-bins", "500"}, err) == 2);
  CHECK(call({"report", s.cube_path, "-o", dir.file("none/r.html")}, err) == 2);
  CHECK_FALSE(fs::exists(out));
  CHECK(call({"report", s.cube_path, "-o", out, "--n", "2,12", "--max-bins", "10"}, err) == 0);
  CHECK(fs::file_size(out) > 10000);
  // Without -o: beside the cube.
  CHECK(call({"report", s.cube_path}, err) == 0);
  CHECK(fs::exists(dir.file("c-report.html")));
}
