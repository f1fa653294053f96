#pragma once
// Shared by the scenario and claims loaders (not installed): typed access to
// TOML values with messages that name the file, line and key.
#include "covergrid/engine/error.hpp"
#include "covergrid/engine/scenario.hpp"
#include "covergrid/methods/registry.hpp"

#include <fmt/format.h>

#include <string_view>
#include <toml++/toml.h>

#include <algorithm>
#include <cstdint>
#include <initializer_list>
#include <filesystem>
#include <string>
#include <vector>
#include <string_view>

namespace covergrid::scenarios::detail {

/// Formats errors as "file:line: [table] key ...".
class Context {
 public:
  explicit Context(std::string source) : source_(std::move(source)) {}
  [[noreturn]] void fail(const toml::node* node, const std::string& message) const {
    throw InputError(where(node), message);
  }
  [[noreturn]] void fail_line(std::size_t line, const std::string& message) const {
    throw InputError(fmt::format("{}:{}", source_, line), message);
  }
  std::string where(const toml::node* node) const {
    if (node && node->source().begin.line > 0)
      return fmt::format("{}:{}", source_, node->source().begin.line);
    return source_;
  }

 private:
  std::string source_;
};

inline std::string value_text(const toml::node& node) {
  if (auto s = node.value_exact<std::string>()) return '"' + *s + '"';
  if (auto i = node.value_exact<std::int64_t>()) return std::to_string(*i);
  if (auto d = node.value_exact<double>()) {
    std::string t = fmt::format("{}", *d);
    if (t.find_first_of(".eEn") == std::string::npos) t += ".0";  // 1.0 stays 1.0, as written
    return t;
  }
  if (auto b = node.value_exact<bool>()) return *b ? "true" : "false";
  if (node.is_table()) return "{...}";
  if (node.is_array()) return "[...]";
  return "(a date or time)";
}

inline std::string type_name(const toml::node& node) {
  switch (node.type()) {
    case toml::node_type::string:
      return "a string";
    case toml::node_type::integer:
      return "an integer";
    case toml::node_type::floating_point:
      return "a number";
    case toml::node_type::boolean:
      return "a boolean";
    case toml::node_type::array:
      return "an array";
    case toml::node_type::table:
      return "a table";
    default:
      return "a date or time";
  }
}

inline void reject_unknown(const Context& ctx, const toml::table& table, const std::string& where,
                           std::initializer_list<std::string_view> allowed) {
  for (const auto& [key, node] : table) {
    if (std::find(allowed.begin(), allowed.end(), key.str()) != allowed.end()) continue;
    std::string list;
    for (auto a : allowed) list += (list.empty() ? "" : ", ") + std::string(a);
    ctx.fail(&node, fmt::format("{}unknown key '{}' (allowed here: {})", where, key.str(), list));
  }
}

inline void reject_unknown(const Context& ctx, const toml::table& table, const std::string& where,
                           const std::vector<std::string>& allowed) {
  for (const auto& [key, node] : table) {
    if (std::find(allowed.begin(), allowed.end(), key.str()) != allowed.end()) continue;
    std::string list;
    for (const auto& a : allowed) list += (list.empty() ? "" : ", ") + a;
    ctx.fail(&node, fmt::format("{}unknown key '{}' (allowed here: {})", where, key.str(), list));
  }
}

inline double number_of(const Context& ctx, const toml::node& node, const std::string& what) {
  if (auto i = node.value_exact<std::int64_t>()) return static_cast<double>(*i);
  if (auto d = node.value_exact<double>()) return *d;
  ctx.fail(&node, fmt::format("{} must be a number, not {}", what, type_name(node)));
}

inline std::int64_t integer_of(const Context& ctx, const toml::node& node, const std::string& what) {
  if (auto i = node.value_exact<std::int64_t>()) return *i;
  ctx.fail(&node, fmt::format("{} must be an integer, not {}", what, type_name(node)));
}

/// A string value; NUL and other control characters are refused in every
/// string (a NUL would cut a label or a path short where it is stored).
inline std::string string_of(const Context& ctx, const toml::node& node, const std::string& what) {
  if (auto s = node.value_exact<std::string>()) {
    for (const char ch : *s)
      if (static_cast<unsigned char>(ch) < 0x20 && ch != '\t')
        ctx.fail(&node, fmt::format("{} holds a control character (code {}); strings may not", what,
                                    static_cast<int>(static_cast<unsigned char>(ch))));
    return *s;
  }
  ctx.fail(&node, fmt::format("{} must be a string, not {}", what, type_name(node)));
}

/// A method or model label: 1 to 64 bytes of printable text (UTF-8 allowed)
/// without '/' or '"', not "." or "..", no space at either end. Labels name
/// HDF5 groups (where '/' separates and "." is the group itself) and are
/// echoed in quotes in messages and tables.
inline void check_label(const Context& ctx, const toml::node& node, const std::string& label,
                        const std::string& what) {
  bool ok = !label.empty() && label.size() <= 64 && label != "." && label != ".." && label.front() != ' ' &&
            label.back() != ' ' && label.find_first_of("/\"") == std::string::npos;
  for (const char ch : label) ok = ok && static_cast<unsigned char>(ch) >= 0x20 && ch != 0x7f;
  if (!ok)
    ctx.fail(&node, fmt::format("{} = \"{}\" is not a label: use 1 to 64 printable characters without "
                                "'/' or '\"', not \".\" or \"..\", no space at either end",
                                what, label));
}

inline bool bool_of(const Context& ctx, const toml::node& node, const std::string& what) {
  if (auto b = node.value_exact<bool>()) return *b;
  ctx.fail(&node, fmt::format("{} must be true or false, not {}", what, type_name(node)));
}

/// Path parameters of `specs` in `given` resolved against `base_dir` (the
/// folder of the file that names them; empty: as written).
inline void resolve_paths(const std::vector<methods::ParamSpec>& specs, methods::ParamValues& given,
                          const std::string& base_dir) {
  for (const auto& spec : specs) {
    if (spec.kind != methods::ParamSpec::Kind::path) continue;
    const auto it = given.find(spec.name);
    if (it == given.end() || !std::holds_alternative<std::string>(it->second)) continue;
    const std::filesystem::path p(std::get<std::string>(it->second));
    if (p.empty() || p.is_absolute() || base_dir.empty()) continue;
    it->second = (std::filesystem::path(base_dir) / p).lexically_normal().string();
  }
}

inline methods::ParamValue param_of(const Context& ctx, const toml::node& node, const std::string& what) {
  if (auto b = node.value_exact<bool>()) return *b;
  if (auto i = node.value_exact<std::int64_t>()) return static_cast<double>(*i);
  if (auto d = node.value_exact<double>()) return *d;
  if (auto s = node.value_exact<std::string>()) return *s;
  ctx.fail(&node, fmt::format("{} must be a boolean, number or string, not {}", what, type_name(node)));
}

/// The [[model]] tables of a scenario (models.cpp), checked against the
/// grid's n; one binomial model when there are none.
std::vector<engine::ModelSpec> read_models(const Context& ctx, const toml::table& root,
                                           const std::vector<int>& ns);

}  // namespace covergrid::scenarios::detail
