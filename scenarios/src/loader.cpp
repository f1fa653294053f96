#include "covergrid/scenarios/loader.hpp"

#include "toml_fields.hpp"

#include "covergrid/engine/error.hpp"
#include "covergrid/engine/output_location.hpp"
#include "covergrid/engine/random.hpp"
#include "covergrid/engine/sha256.hpp"
#include "covergrid/methods/limits.hpp"

#include <fmt/format.h>
#include <toml++/toml.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <limits>
#include <numeric>
#include <set>
#include <sstream>

namespace covergrid::scenarios {

namespace {

using namespace detail;
using engine::Scenario;
namespace fs = std::filesystem;

/// Decimal places of the shortest text that reads back as `x` ("0.005": 3,
/// "1e-05": 5, "40": 0).
int decimal_places(double x) {
  const std::string t = fmt::format("{}", x);
  const std::size_t e = t.find_first_of("eE");
  const std::string mantissa = t.substr(0, e);
  const std::size_t dot = mantissa.find('.');
  const int frac = dot == std::string::npos ? 0 : static_cast<int>(mantissa.size() - dot - 1);
  const int exponent = e == std::string::npos ? 0 : std::stoi(t.substr(e + 1));
  return std::max(0, frac - exponent);
}

/// Decimal places of every point of a linear grid from a to b: with a = A /
/// 10^D and b = B / 10^D (D the places of the inputs), the points a + i (b -
/// a) / (k - 1) are decimals exactly when (k - 1) / gcd(k - 1, B - A) has no
/// prime factor but 2 and 5, and then have D + max(powers) places. -1 when
/// they are not all decimals (a count of 7 from 0 to 1: sixths) or need more
/// than 15 places.
int grid_places(double a, double b, std::int64_t k) {
  const int d = std::max(decimal_places(a), decimal_places(b));
  if (d > 15) return -1;
  const double scale = std::pow(10.0, d);
  const auto A = static_cast<std::int64_t>(std::llround(a * scale));
  const auto B = static_cast<std::int64_t>(std::llround(b * scale));
  if (k < 2) return d;
  std::int64_t r = (k - 1) / std::gcd(k - 1, B - A);
  int twos = 0, fives = 0;
  for (; r % 2 == 0; r /= 2) ++twos;
  for (; r % 5 == 0; r /= 5) ++fives;
  const int places = d + std::max(twos, fives);
  return r == 1 && places <= 15 ? places : -1;
}

/// A computed grid value moved to the decimal the user meant: from + i*step
/// in binary floating point lands an ulp or two off the decimal (0.01 + 8 *
/// 0.005 is 0.049999999999999996); `places` (from grid_places, or the
/// places of from, to and step) says the exact point is a decimal with that
/// many places, so the value rounded to them is read back (its nearest
/// double) when that is within 4 ulps, as it is unless the arithmetic went
/// wrong. places < 0: kept as computed.
double nearest_decimal(double v, int places) {
  if (places < 0) return v;
  const double d = std::strtod(fmt::format("{:.{}f}", v, places).c_str(), nullptr);
  const double ulp = std::nextafter(std::fabs(v), std::numeric_limits<double>::infinity()) - std::fabs(v);
  return std::fabs(d - v) <= 4 * ulp ? d : v;
}

/// A value list, range with step, or count-spaced range. `kind` is "n" or "p".
std::vector<double> axis_values(const Context& ctx, const toml::node& node, const std::string& key,
                                bool integer) {
  const std::string what = "[grid] " + key;
  std::vector<double> out;
  auto check = [&](const toml::node& n, double v, const std::string& name) {
    if (integer) {
      if (!n.is_integer()) ctx.fail(&n, fmt::format("{} must be an integer, not {}", name, value_text(n)));
      if (v < 1) ctx.fail(&n, fmt::format("{} = {} is below 1", name, value_text(n)));
      if (v > max_sample_size)
        ctx.fail(&n, fmt::format("{} = {} is above the largest supported n ({})", name, value_text(n),
                                 max_sample_size));
    } else if (!(v >= 0.0 && v <= 1.0)) {
      ctx.fail(&n, fmt::format("{} = {} is outside [0, 1]", name, value_text(n)));
    }
  };
  if (node.is_array()) {
    const auto& arr = *node.as_array();
    if (arr.empty()) ctx.fail(&node, what + " is an empty list");
    for (const auto& item : arr) {
      const double v = number_of(ctx, item, what + " entries");
      check(item, v, what + " entry");
      out.push_back(v);
    }
  } else if (node.is_table()) {
    const auto& t = *node.as_table();
    reject_unknown(ctx, t, what + ": ", {"from", "to", "step", "count", "spacing"});
    const toml::node* from = t.get("from");
    const toml::node* to = t.get("to");
    if (!from) ctx.fail(&node, what + " needs 'from'");
    if (!to) ctx.fail(&node, what + " needs 'to'");
    const double a = number_of(ctx, *from, what + ".from");
    const double b = number_of(ctx, *to, what + ".to");
    check(*from, a, what + ".from");
    check(*to, b, what + ".to");
    if (b < a)
      ctx.fail(to, fmt::format("{}.to = {} is below {}.from = {}", what, value_text(*to), what,
                               value_text(*from)));
    const toml::node* step = t.get("step");
    const toml::node* count = t.get("count");
    const toml::node* spacing = t.get("spacing");
    if (step && count) ctx.fail(step, what + " takes 'step' or 'count', not both");
    std::string space = spacing ? string_of(ctx, *spacing, what + ".spacing") : "linear";
    const std::vector<std::string> allowed =
        integer ? std::vector<std::string>{"linear", "log"} : std::vector<std::string>{"linear", "logit"};
    if (std::find(allowed.begin(), allowed.end(), space) == allowed.end())
      ctx.fail(spacing, fmt::format("{}.spacing = \"{}\" is not one of \"{}\", \"{}\"", what, space,
                                    allowed[0], allowed[1]));
    if (step) {
      if (spacing && space != "linear") ctx.fail(spacing, what + ": 'step' goes with linear spacing only");
      const double s = integer ? static_cast<double>(integer_of(ctx, *step, what + ".step"))
                               : number_of(ctx, *step, what + ".step");
      if (!(s > 0)) ctx.fail(step, fmt::format("{}.step = {} must be positive", what, value_text(*step)));
      const double steps = std::floor((b - a) / s + 1e-9);
      if (steps > 1e7)
        ctx.fail(step, fmt::format("{}.step = {} gives more than 10^7 points", what, value_text(*step)));
      int places = std::max({decimal_places(a), decimal_places(b), decimal_places(s)});
      if (places > 15) places = -1;
      for (double i = 0; i <= steps; ++i) out.push_back(std::min(b, nearest_decimal(a + i * s, places)));
    } else {
      if (!count) {
        if (!integer) ctx.fail(&node, what + " needs 'count' or 'step'");
        for (double v = a; v <= b; ++v) out.push_back(v);
      } else {
        const std::int64_t k = integer_of(ctx, *count, what + ".count");
        if (k < 1) ctx.fail(count, fmt::format("{}.count = {} must be at least 1", what, k));
        if (k > 10'000'000) ctx.fail(count, fmt::format("{}.count = {} is above 10^7", what, k));
        // One point of a range is ambiguous (which end?): only from = to may say it.
        if (k == 1 && a != b)
          ctx.fail(count,
                   fmt::format("{}.count = 1 needs from = to (from = {:g}, to = {:g}); write one value "
                               "instead, or a count of at least 2",
                               what, a, b));
        if (space == "logit" && (a <= 0 || b >= 1))
          ctx.fail(spacing, what + ": logit spacing needs 0 < from and to < 1");
        const int places = space == "linear" ? grid_places(a, b, k) : -1;
        for (std::int64_t i = 0; i < k; ++i) {
          const double u = k == 1 ? 0.0 : static_cast<double>(i) / static_cast<double>(k - 1);
          double v = 0;
          if (space == "log")
            v = std::round(std::exp(std::log(a) + u * (std::log(b) - std::log(a))));
          else if (space == "logit") {
            const double la = std::log(a / (1 - a)), lb = std::log(b / (1 - b));
            const double l = la + u * (lb - la);
            v = 1 / (1 + std::exp(-l));
            if (i == 0) v = a;
            if (i == k - 1) v = b;
          } else {
            // Linear: from + i * step, then the decimal it stands for; the
            // logit form above stays as computed (its points are not decimals).
            const double spacing_step = k == 1 ? 0.0 : (b - a) / static_cast<double>(k - 1);
            v = i == k - 1 ? b : nearest_decimal(a + static_cast<double>(i) * spacing_step, places);
            if (integer) v = std::round(v);
          }
          out.push_back(v);
        }
      }
    }
  } else {
    const double v = number_of(ctx, node, what);
    check(node, v, what);
    out.push_back(v);
  }
  std::sort(out.begin(), out.end());
  if (node.is_array()) {
    const auto dup = std::adjacent_find(out.begin(), out.end());
    if (dup != out.end()) ctx.fail(&node, fmt::format("{} lists the value {} twice", what, *dup));
  }
  out.erase(std::unique(out.begin(), out.end()), out.end());  // log-spaced n may repeat
  return out;
}

}  // namespace

namespace {

/// Refuses outputs that would land on an input or on each other (the cube
/// written over the scenario file, `cube = "t-summary.csv"` beside `tables =
/// "t"`), naming both: compared as absolute paths with symbolic links of
/// their existing parts resolved.
void check_collisions(const Context& ctx, const toml::table& root, const engine::Scenario& s) {
  struct Output {
    std::string what;
    const char* key;  // the [output] key that names it, or nullptr for an input
    std::string path;
  };
  std::vector<Output> files;
  if (!s.source_name.empty() && s.source_name.front() != '<')
    files.push_back({"the scenario file itself", nullptr, s.source_name});
  files.push_back({fmt::format("[output] cube = \"{}\"", s.cube_path), "cube", s.cube_path});
  for (const char* suffix : {".journal", ".partial"})
    files.push_back({fmt::format("the file {}{} written while the cube is in progress", s.cube_path, suffix),
                     "cube", s.cube_path + suffix});
  if (!s.tables_prefix.empty())
    for (const char* table : {"-summary.csv", "-ranking.csv", "-summary.md"})
      for (const char* suffix : {"", ".partial"})
        files.push_back({fmt::format("the table {}{}{} of [output] tables = \"{}\"", s.tables_prefix, table,
                                     suffix, s.tables_prefix),
                         "tables", s.tables_prefix + table + suffix});
  std::vector<std::string> canonical;
  for (const auto& f : files) {
    std::error_code ec;
    fs::path c = fs::weakly_canonical(fs::absolute(f.path, ec), ec);
    canonical.push_back(ec ? fs::absolute(f.path).lexically_normal().string() : c.string());
  }
  for (std::size_t i = 0; i < files.size(); ++i)
    for (std::size_t j = 0; j < i; ++j) {
      if (canonical[i] != canonical[j] || files[i].key == files[j].key) continue;
      const toml::node* out_node = root.get("output");
      const toml::node* at =
          out_node && out_node->is_table() ? out_node->as_table()->get(files[i].key) : nullptr;
      ctx.fail(at,
               fmt::format("{} is the same file as {}; choose another name", files[i].what, files[j].what));
    }
}

}  // namespace

engine::Scenario load_scenario_text(std::string_view text, const std::string& source_name,
                                    const std::string& base_dir, bool check_output_folders) {
  const Context ctx(source_name);
  toml::table root;
  try {
    root = toml::parse(text, source_name);
  } catch (const toml::parse_error& e) {
    ctx.fail_line(e.source().begin.line, fmt::format("TOML syntax error: {}", e.description()));
  }
  Scenario s;
  s.source_name = source_name;
  s.source_text = std::string(text);
  s.sha256 = engine::sha256_hex(text);
  reject_unknown(ctx, root, "", {"title", "seed", "grid", "evaluate", "method", "model", "output"});

  if (const auto* t = root.get("title")) s.title = string_of(ctx, *t, "title");
  if (const auto* seed = root.get("seed")) {
    const std::int64_t v = integer_of(ctx, *seed, "seed");
    if (v < 0) ctx.fail(seed, fmt::format("seed = {} must not be negative", v));
    s.seed = static_cast<std::uint64_t>(v);
  }

  // [grid]
  const toml::node* grid_node = root.get("grid");
  if (!grid_node) ctx.fail(nullptr, "missing [grid] table (it needs n, p and levels)");
  if (!grid_node->is_table()) ctx.fail(grid_node, "grid must be a table, [grid]");
  const auto& grid = *grid_node->as_table();
  reject_unknown(ctx, grid, "[grid] ", {"n", "p", "levels", "sides"});
  const toml::node* n_node = grid.get("n");
  const toml::node* p_node = grid.get("p");
  const toml::node* level_node = grid.get("levels");
  if (!n_node) ctx.fail(grid_node, "[grid] needs 'n'");
  if (!p_node) ctx.fail(grid_node, "[grid] needs 'p'");
  if (!level_node) ctx.fail(grid_node, "[grid] needs 'levels'");
  for (double v : axis_values(ctx, *n_node, "n", true)) s.n.push_back(static_cast<int>(v));
  s.p = axis_values(ctx, *p_node, "p", false);
  {
    std::vector<const toml::node*> items;
    if (level_node->is_array())
      for (const auto& i : *level_node->as_array()) items.push_back(&i);
    else
      items.push_back(level_node);
    if (items.empty()) ctx.fail(level_node, "[grid] levels is an empty list");
    for (const auto* i : items) {
      const double v = number_of(ctx, *i, "[grid] levels entries");
      if (!methods::level_in_range(v))
        ctx.fail(i, fmt::format("[grid] levels value {} is outside {} (the levels every method computes)",
                                value_text(*i), methods::level_range_text));
      if (std::find(s.levels.begin(), s.levels.end(), v) != s.levels.end())
        ctx.fail(i, fmt::format("[grid] levels lists {} twice", value_text(*i)));
      s.levels.push_back(v);
    }
    std::sort(s.levels.begin(), s.levels.end());
  }
  if (const toml::node* sides = grid.get("sides")) {
    std::vector<const toml::node*> items;
    if (sides->is_array())
      for (const auto& i : *sides->as_array()) items.push_back(&i);
    else
      items.push_back(sides);
    if (items.empty()) ctx.fail(sides, "[grid] sides is an empty list");
    for (const auto* i : items) {
      const std::string name = string_of(ctx, *i, "[grid] sides entries");
      methods::Side side{};
      if (!methods::parse_side(name, side))
        ctx.fail(
            i, fmt::format(
                   "[grid] sides entry \"{}\" is not one of \"two-sided\", \"lower-bound\", \"upper-bound\"",
                   name));
      if (std::find(s.sides.begin(), s.sides.end(), side) != s.sides.end())
        ctx.fail(i, fmt::format("[grid] sides lists \"{}\" twice", name));
      s.sides.push_back(side);
    }
    std::sort(s.sides.begin(), s.sides.end());
  } else {
    s.sides = {methods::Side::two_sided};
  }

  // [evaluate]
  if (const toml::node* ev_node = root.get("evaluate")) {
    if (!ev_node->is_table()) ctx.fail(ev_node, "evaluate must be a table, [evaluate]");
    const auto& ev = *ev_node->as_table();
    reject_unknown(ctx, ev, "[evaluate] ", {"exact", "replicates", "target_se", "max_replicates"});
    if (const auto* e = ev.get("exact")) s.exact = bool_of(ctx, *e, "[evaluate] exact");
    const toml::node* r = ev.get("replicates");
    if (r) {
      const std::int64_t v = integer_of(ctx, *r, "[evaluate] replicates");
      if (v < 0) ctx.fail(r, fmt::format("[evaluate] replicates = {} must not be negative", v));
      if (v > max_replicates_per_cell)
        ctx.fail(r, fmt::format("[evaluate] replicates = {} is above the limit of {} per cell", v,
                                max_replicates_per_cell));
      s.replicates = static_cast<std::uint64_t>(v);
    }
    const toml::node* se = ev.get("target_se");
    const toml::node* cap = ev.get("max_replicates");
    if (se) {
      const double v = number_of(ctx, *se, "[evaluate] target_se");
      if (!(v > 0 && v < 0.5))
        ctx.fail(se, fmt::format("[evaluate] target_se = {} is outside (0, 0.5)", value_text(*se)));
      s.target_se = v;
      if (!r) s.replicates = 1000;  // the first round
      if (s.replicates == 0)
        ctx.fail(r, "[evaluate] replicates = 0 with target_se: the first round needs replicates");
      s.max_replicates = 1'000'000;
    }
    if (cap) {
      if (!se)
        ctx.fail(cap, "[evaluate] max_replicates goes with target_se (it caps the replicates it chooses)");
      const std::int64_t v = integer_of(ctx, *cap, "[evaluate] max_replicates");
      if (v < static_cast<std::int64_t>(s.replicates))
        ctx.fail(cap,
                 fmt::format("[evaluate] max_replicates = {} is below replicates = {}", v, s.replicates));
      if (v > max_replicates_per_cell)
        ctx.fail(cap, fmt::format("[evaluate] max_replicates = {} is above the limit of {} per cell", v,
                                  max_replicates_per_cell));
      s.max_replicates = static_cast<std::uint64_t>(v);
    }
    if (!s.exact && s.replicates == 0)
      ctx.fail(ev_node, "[evaluate] turns exact evaluation off and has no replicates: nothing to compute");
  }

  // [[method]]
  const toml::node* m_node = root.get("method");
  if (!m_node) ctx.fail(nullptr, "no [[method]] entries: name at least one interval method");
  if (!m_node->is_array_of_tables()) ctx.fail(m_node, "method must be an array of tables, [[method]]");
  std::set<std::string> labels;
  std::vector<const toml::node*> id_nodes;
  for (const auto& item : *m_node->as_array()) {
    const auto& t = *item.as_table();
    const toml::node* id_node = t.get("id");
    if (!id_node) ctx.fail(&item, "[[method]] needs 'id'");
    id_nodes.push_back(id_node);
    const std::string id = string_of(ctx, *id_node, "[[method]] id");
    const methods::MethodEntry* entry = methods::find_method(id);
    if (!entry) {
      std::string ids;
      for (const auto& e : methods::registry()) ids += (ids.empty() ? "" : ", ") + e.info.id;
      ctx.fail(id_node, fmt::format("[[method]] id = \"{}\" is not a known method (known: {})", id, ids));
    }
    methods::ParamValues given;
    std::string label;
    const toml::node* label_node = t.get("label");
    if (label_node) {
      label = string_of(ctx, *label_node, "[[method]] label");
      check_label(ctx, *label_node, label, "[[method]] label");
    }
    for (const auto& [key, node] : t) {
      if (key.str() == "id" || key.str() == "label") continue;
      given[std::string(key.str())] = param_of(ctx, node, fmt::format("[[method]] {}.{}", id, key.str()));
    }
    resolve_paths(entry->info.params, given, base_dir);
    methods::MethodInstance inst;
    try {
      inst = methods::make_instance(id, given, label);
    } catch (const methods::ParameterError& e) {
      const toml::node* at = t.get(e.key());
      ctx.fail(at ? at : &item, fmt::format("[[method]] {}", e.what()));
    }
    if (!labels.insert(inst.label).second)
      ctx.fail(&item, fmt::format("[[method]] label \"{}\" is used twice; give one a 'label'", inst.label));
    // A method with limits for some n only (a table) has them for the grid.
    if (const std::string why = methods::missing_limits(inst, s.n, s.levels, s.sides); !why.empty()) {
      const toml::node* file = t.get("file");
      ctx.fail(file ? file : &item, fmt::format("[[method]] {}: {}", inst.label, why));
    }
    bool any_side = false;
    for (auto side : s.sides) any_side |= inst.method->supports(side);
    if (!any_side) ctx.fail(id_node, fmt::format("[[method]] {} supports none of the scenario's sides", id));
    s.methods.push_back(std::move(inst));
  }
  if (s.methods.empty()) ctx.fail(m_node, "no [[method]] entries");

  // [[model]] (models.cpp)
  s.models = read_models(ctx, root, s.n);
  // A method that needs the cluster counts under a model (design-effect
  // methods in clustered samples) is evaluated by Monte Carlo only.
  if (s.replicates == 0)
    for (std::size_t i = 0; i < s.methods.size(); ++i)
      for (const auto& model : s.models)
        if (methods::under_design(s.methods[i].method, model.model->design())->needs_clusters())
          ctx.fail(id_nodes[i],
                   fmt::format("[[method]] {} needs each cluster's count under the model {}, which only "
                               "simulation draws: give [evaluate] replicates (e.g. 20000)",
                               s.methods[i].label, model.label));
  // The grid's size, refused before anything is planned or allocated.
  const double cells = static_cast<double>(s.n.size()) * static_cast<double>(s.p.size()) *
                       static_cast<double>(s.models.size());
  if (cells > max_grid_cells)
    ctx.fail(grid.get("p"),
             fmt::format("[grid] n ({} values) times p ({} values){} is {:.3g} cells; a scenario may have at "
                         "most {:.0e}: split it into several scenarios",
                         s.n.size(), s.p.size(),
                         s.models.size() > 1 ? fmt::format(" times {} models", s.models.size()) : "", cells,
                         max_grid_cells));
  if (engine::combo_count(s) > max_combinations)
    ctx.fail(grid.get("levels"),
             fmt::format("[grid] levels ({}) times sides ({}) times the {} [[method]] entries are {} "
                         "combinations; a scenario may have at most {}",
                         s.levels.size(), s.sides.size(), s.methods.size(), engine::combo_count(s),
                         max_combinations));

  // [output]
  std::string stem = fs::path(source_name).stem().string();
  if (stem.empty() || stem.front() == '<') stem = "covergrid";
  std::string cube = stem + ".h5", tables = stem;
  if (const toml::node* out_node = root.get("output")) {
    if (!out_node->is_table()) ctx.fail(out_node, "output must be a table, [output]");
    const auto& out = *out_node->as_table();
    reject_unknown(ctx, out, "[output] ", {"cube", "tables"});
    if (const auto* c = out.get("cube")) {
      cube = string_of(ctx, *c, "[output] cube");
      if (cube.empty()) ctx.fail(c, "[output] cube must not be empty");
    }
    if (const auto* tb = out.get("tables")) tables = string_of(ctx, *tb, "[output] tables");
  }
  auto resolve = [&](const std::string& path) {
    if (path.empty()) return path;
    const fs::path p(path);
    if (p.is_absolute() || base_dir.empty()) return p.lexically_normal().string();
    return (fs::path(base_dir) / p).lexically_normal().string();
  };
  s.cube_path = resolve(cube);
  s.tables_prefix = resolve(tables);
  // An output location that cannot be written (a missing folder, a file
  // where a folder should be, a read-only or forbidden folder) is bad input,
  // named here with its key and line before any work starts. The journal and
  // the .partial files live beside the cube, so its folder covers them.
  auto check_location = [&](const std::string& path, const char* key, const std::string& probe) {
    if (path.empty()) return;
    const std::string problem = engine::output_location_problem(probe);
    if (problem.empty()) return;
    const toml::node* out_node = root.get("output");
    const toml::node* at = out_node && out_node->is_table() ? out_node->as_table()->get(key) : nullptr;
    ctx.fail(at, fmt::format("[output] {} = \"{}\"{}: {}", key, path, at ? "" : " (the default)", problem));
  };
  if (check_output_folders) {
    check_location(s.cube_path, "cube", s.cube_path);
    check_location(s.tables_prefix, "tables", s.tables_prefix + "-summary.csv");
    check_collisions(ctx, root, s);
  }
  return s;
}

engine::Scenario load_scenario_file(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) throw InputError(path, "cannot open the scenario file");
  std::stringstream buffer;
  buffer << in.rdbuf();
  const fs::path p(path);
  return load_scenario_text(buffer.str(), path, p.parent_path().string());
}

}  // namespace covergrid::scenarios
