#include "covergrid/scenarios/claims.hpp"

#include "covergrid/scenarios/loader.hpp"
#include "covergrid/methods/limits.hpp"
#include "toml_fields.hpp"

#include <filesystem>
#include <fstream>
#include <sstream>

namespace covergrid::scenarios {

namespace {

using namespace detail;

std::vector<int> claim_n(const Context& ctx, const toml::node& node, const std::string& what) {
  std::vector<int> out;
  auto one = [&](const toml::node& item, const std::string& name) {
    const std::int64_t v = integer_of(ctx, item, name);
    if (v < 1) ctx.fail(&item, fmt::format("{} = {} is below 1", name, v));
    if (v > max_sample_size)
      ctx.fail(&item, fmt::format("{} = {} is above the largest supported n ({})", name, v, max_sample_size));
    return static_cast<int>(v);
  };
  if (node.is_array()) {
    const auto& arr = *node.as_array();
    if (arr.empty()) ctx.fail(&node, what + " is an empty list");
    if (arr.size() > max_claim_n_count)
      ctx.fail(&node, fmt::format("{} lists more than {} values", what, max_claim_n_count));
    for (const auto& item : arr) out.push_back(one(item, what + " entry"));
    std::sort(out.begin(), out.end());
    if (std::adjacent_find(out.begin(), out.end()) != out.end())
      ctx.fail(&node, what + " lists a value twice");
  } else if (node.is_table()) {
    const auto& t = *node.as_table();
    reject_unknown(ctx, t, what + ": ", {"from", "to", "step"});
    const toml::node* from = t.get("from");
    const toml::node* to = t.get("to");
    if (!from) ctx.fail(&node, what + " needs 'from'");
    if (!to) ctx.fail(&node, what + " needs 'to'");
    const int a = one(*from, what + ".from"), b = one(*to, what + ".to");
    if (b < a)
      ctx.fail(to, fmt::format("{}.to = {} is below {}.from = {}: the range is empty", what, b, what, a));
    std::int64_t step = 1;
    if (const toml::node* s = t.get("step")) {
      step = integer_of(ctx, *s, what + ".step");
      if (step < 1) ctx.fail(s, fmt::format("{}.step = {} must be at least 1", what, step));
    }
    // Counted, never stepped past b: a + step can overflow for a step near
    // INT64_MAX, while a + k * step for k < count stays within [a, b].
    const std::int64_t count = (std::int64_t{b} - a) / step + 1;
    if (static_cast<std::size_t>(count) > max_claim_n_count)
      ctx.fail(&node, fmt::format("{} spans more than {} values", what, max_claim_n_count));
    for (std::int64_t k = 0; k < count; ++k) out.push_back(static_cast<int>(a + k * step));
  } else {
    out.push_back(one(node, what));
  }
  return out;
}

std::pair<double, double> claim_p(const Context& ctx, const toml::node& node, const std::string& what) {
  auto one = [&](const toml::node& item, const std::string& name) {
    const double v = number_of(ctx, item, name);
    if (!(v >= 0 && v <= 1))
      ctx.fail(&item, fmt::format("{} = {} is outside [0, 1]", name, value_text(item)));
    return v;
  };
  if (node.is_table()) {
    const auto& t = *node.as_table();
    reject_unknown(ctx, t, what + ": ", {"from", "to"});
    const toml::node* from = t.get("from");
    const toml::node* to = t.get("to");
    if (!from) ctx.fail(&node, what + " needs 'from'");
    if (!to) ctx.fail(&node, what + " needs 'to'");
    const double a = one(*from, what + ".from"), b = one(*to, what + ".to");
    if (b < a)
      ctx.fail(to, fmt::format("{}.to = {} is below {}.from = {}: the range is empty", what, value_text(*to),
                               what, value_text(*from)));
    return {a, b};
  }
  if (node.is_array())
    ctx.fail(&node, what + " is a range { from = ..., to = ... } or one number, not a list");
  const double v = one(node, what);
  return {v, v};
}

methods::MethodInstance claim_method(const Context& ctx, const toml::node& node,
                                     const std::string& base_dir) {
  std::string id;
  methods::ParamValues given;
  const toml::node* id_node = &node;
  if (node.is_table()) {
    const auto& t = *node.as_table();
    id_node = t.get("id");
    if (!id_node) ctx.fail(&node, "[[claim]] method needs 'id'");
    id = string_of(ctx, *id_node, "[[claim]] method.id");
    for (const auto& [key, value] : t)
      if (key.str() != "id")
        given[std::string(key.str())] = param_of(ctx, value, fmt::format("[[claim]] method.{}", key.str()));
  } else {
    id = string_of(ctx, node, "[[claim]] method");
  }
  if (const auto* entry = methods::find_method(id)) resolve_paths(entry->info.params, given, base_dir);
  if (!methods::find_method(id)) {
    std::string ids;
    for (const auto& e : methods::registry()) ids += (ids.empty() ? "" : ", ") + e.info.id;
    ctx.fail(id_node, fmt::format("[[claim]] method \"{}\" is not a known method (known: {})", id, ids));
  }
  try {
    return methods::make_instance(id, given);
  } catch (const methods::ParameterError& e) {
    const toml::node* at = node.is_table() ? node.as_table()->get(e.key()) : nullptr;
    ctx.fail(at ? at : &node, fmt::format("[[claim]] {}", e.what()));
  }
}

/// model = "binomial" or model = { kind = "hypergeometric", population = 5000 }.
std::shared_ptr<const engine::SamplingModel> claim_model(const Context& ctx, const toml::node& node) {
  std::string kind;
  methods::ParamValues given;
  const toml::node* kind_node = &node;
  if (node.is_table()) {
    const auto& t = *node.as_table();
    kind_node = t.get("kind");
    if (!kind_node) ctx.fail(&node, "[[claim]] model needs 'kind'");
    kind = string_of(ctx, *kind_node, "[[claim]] model.kind");
    for (const auto& [key, value] : t)
      if (key.str() != "kind")
        given[std::string(key.str())] = param_of(ctx, value, fmt::format("[[claim]] model.{}", key.str()));
  } else {
    kind = string_of(ctx, node, "[[claim]] model");
  }
  try {
    return engine::make_model(kind, given);
  } catch (const methods::ParameterError& e) {
    const toml::node* at = node.is_table() ? node.as_table()->get(e.key()) : nullptr;
    ctx.fail(e.key() == "kind" ? kind_node : (at ? at : &node), fmt::format("[[claim]] model {}", e.what()));
  }
}

}  // namespace

std::vector<engine::Claim> load_claims_text(std::string_view text, const std::string& source_name,
                                            const std::string& base_dir) {
  const Context ctx(source_name);
  toml::table root;
  try {
    root = toml::parse(text, source_name);
  } catch (const toml::parse_error& e) {
    ctx.fail_line(e.source().begin.line, fmt::format("TOML syntax error: {}", e.description()));
  }
  reject_unknown(ctx, root, "", {"seed", "claim"});
  std::uint64_t seed = 0;
  if (const auto* s = root.get("seed")) {
    const std::int64_t v = integer_of(ctx, *s, "seed");
    if (v < 0) ctx.fail(s, fmt::format("seed = {} must not be negative", v));
    seed = static_cast<std::uint64_t>(v);
  }
  const toml::node* list = root.get("claim");
  if (!list) ctx.fail(nullptr, "no [[claim]] entries");
  if (!list->is_array_of_tables()) ctx.fail(list, "claim must be an array of tables, [[claim]]");
  std::vector<engine::Claim> claims;
  for (const auto& item : *list->as_array()) {
    const auto& t = *item.as_table();
    reject_unknown(ctx, t, "[[claim]] ",
                   {"name", "method", "model", "level", "side", "n", "p", "tolerance", "about", "replicates",
                    "p_points", "confidence"});
    engine::Claim c;
    c.seed = seed;
    c.name = fmt::format("claim {}", claims.size() + 1);
    if (const auto* nm = t.get("name")) c.name = string_of(ctx, *nm, "[[claim]] name");
    auto required = [&](const char* key) {
      const toml::node* v = t.get(key);
      if (!v) ctx.fail(&item, fmt::format("[[claim]] \"{}\" needs '{}'", c.name, key));
      return v;
    };
    const toml::node* m = required("method");
    c.method = claim_method(ctx, *m, base_dir);
    const toml::node* lv = required("level");
    c.level = number_of(ctx, *lv, "[[claim]] level");
    if (!methods::level_in_range(c.level))
      ctx.fail(lv, fmt::format("[[claim]] level = {} is outside {} (the levels every method computes)",
                               value_text(*lv), methods::level_range_text));
    if (const auto* sd = t.get("side")) {
      const std::string name = string_of(ctx, *sd, "[[claim]] side");
      if (!methods::parse_side(name, c.side))
        ctx.fail(
            sd,
            fmt::format("[[claim]] side \"{}\" is not one of \"two-sided\", \"lower-bound\", \"upper-bound\"",
                        name));
      if (!c.method.method->supports(c.side))
        ctx.fail(sd, fmt::format("[[claim]] {} does not define the side \"{}\"", c.method.label, name));
    }
    c.n = claim_n(ctx, *required("n"), "[[claim]] n");
    {
      const std::vector<double> levels = {c.level};
      const std::vector<methods::Side> sides = {c.side};
      if (const std::string why = methods::missing_limits(c.method, c.n, levels, sides); !why.empty())
        ctx.fail(m, fmt::format("[[claim]] {}: {}", c.method.label, why));
    }
    if (const auto* md = t.get("model")) {
      c.model = claim_model(ctx, *md);
      if (const std::string why = engine::refused_n(*c.model, c.n); !why.empty())
        ctx.fail(md, fmt::format("[[claim]] model {} cannot draw every n of the claim: {}", c.model->label(),
                                 why));
    }
    std::tie(c.p_lo, c.p_hi) = claim_p(ctx, *required("p"), "[[claim]] p");
    if (const auto* tol = t.get("tolerance")) {
      c.tolerance = number_of(ctx, *tol, "[[claim]] tolerance");
      if (!(c.tolerance >= 0))
        ctx.fail(tol, fmt::format("[[claim]] tolerance = {} must not be negative", value_text(*tol)));
      if (!(c.tolerance < c.level))
        ctx.fail(tol, fmt::format(
                          "[[claim]] tolerance = {} is not below the level {}: the claim would say nothing",
                          value_text(*tol), c.level));
    }
    if (const auto* ab = t.get("about")) {
      const std::string a = string_of(ctx, *ab, "[[claim]] about");
      if (a == "minimum")
        c.kind = engine::ClaimKind::minimum;
      else if (a == "mean")
        c.kind = engine::ClaimKind::mean;
      else
        ctx.fail(ab, fmt::format("[[claim]] about = \"{}\" is not one of \"minimum\", \"mean\"", a));
    }
    if (const auto* r = t.get("replicates")) {
      const std::int64_t v = integer_of(ctx, *r, "[[claim]] replicates");
      if (v < 0) ctx.fail(r, fmt::format("[[claim]] replicates = {} must not be negative", v));
      if (v > max_replicates_per_cell)
        ctx.fail(r, fmt::format("[[claim]] replicates = {} is above the limit of {} per cell", v,
                                max_replicates_per_cell));
      c.replicates = static_cast<std::uint64_t>(v);
    }
    if (const auto* pp = t.get("p_points")) {
      const std::int64_t v = integer_of(ctx, *pp, "[[claim]] p_points");
      if (v < 2 || static_cast<std::size_t>(v) > max_claim_p_points)
        ctx.fail(pp, fmt::format("[[claim]] p_points = {} is outside 2..{}", v, max_claim_p_points));
      c.p_points = static_cast<std::size_t>(v);
    }
    if (const auto* cf = t.get("confidence")) {
      c.confidence = number_of(ctx, *cf, "[[claim]] confidence");
      if (!(c.confidence > 0 && c.confidence < 1))
        ctx.fail(cf, fmt::format("[[claim]] confidence = {} is outside (0, 1)", value_text(*cf)));
    }
    if (c.replicates == 0 && (t.get("p_points") || t.get("confidence")))
      ctx.fail(t.get("p_points") ? t.get("p_points") : t.get("confidence"),
               "[[claim]] p_points and confidence go with replicates > 0 (a simulated claim)");
    if (c.replicates == 0 && methods::under_design(c.method.method, c.model->design())->needs_clusters())
      ctx.fail(m, fmt::format("[[claim]] {} needs each cluster's count under the model {}, which only "
                              "simulation draws: give the claim replicates (e.g. 20000)",
                              c.method.label, c.model->label()));
    claims.push_back(std::move(c));
  }
  if (claims.empty()) ctx.fail(list, "no [[claim]] entries");
  return claims;
}

std::vector<engine::Claim> load_claims_file(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) throw InputError(path, "cannot open the claims file");
  std::stringstream buffer;
  buffer << in.rdbuf();
  return load_claims_text(buffer.str(), path, std::filesystem::path(path).parent_path().string());
}

}  // namespace covergrid::scenarios
