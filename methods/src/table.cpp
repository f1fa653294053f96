// table — a black-box interval: the limits some other procedure produced,
// read from a CSV file, so that covergrid can evaluate, rank, audit and plan
// a method whose code nobody can see.
//
// The file: a header naming the columns (any order): n, x, lower, upper,
// and optionally level and side; then one row per (n, x[, level][, side]).
// Lines that are empty or start with '#' are skipped; fields may be quoted
// with '"' and are trimmed of spaces. A table without a level (side) column
// serves every level (side) asked of it; with one, exactly those rows. Rows
// are checked as they are read; the first fault ends the read with a
// ParameterError naming the file, its line and the column: a field that is
// not a number, n < 1, x outside 0..n or not whole, a limit outside [0, 1],
// lower > upper, a level outside (0, 1), an unknown side, a duplicate row.
// Rows missing for an n the grid asks for are found by missing(), which the
// scenario loader and the command line call before anything runs.
//
// One-sided: a lower bound at level 1 - a reads the row's lower limit (its
// upper limit is taken as 1), an upper bound its upper limit (lower 0).
// Levels match within 1e-9.
#include "covergrid/methods/registry.hpp"

#include <fmt/format.h>

#include <cmath>
#include <cstdlib>
#include <fstream>
#include <map>
#include <optional>
#include <sstream>
#include <tuple>

namespace covergrid::methods {
namespace {

constexpr int any_side = 3;
constexpr long long any_level = -1;

long long level_key(double level) { return std::llround(level * 1e9); }

int side_key(Side side) { return static_cast<int>(side); }

struct Row {
  double lower, upper;
  int line;
};

using Key = std::tuple<int, int, long long, int>;  // n, x, level key, side key

std::string trim(const std::string& s) {
  const auto a = s.find_first_not_of(" \t\r");
  if (a == std::string::npos) return {};
  const auto b = s.find_last_not_of(" \t\r");
  return s.substr(a, b - a + 1);
}

/// Splits one CSV line; '"' quotes a field ("" is a quote inside one).
std::vector<std::string> fields_of(const std::string& line) {
  std::vector<std::string> out;
  std::string field;
  bool quoted = false;
  for (std::size_t i = 0; i < line.size(); ++i) {
    const char c = line[i];
    if (quoted) {
      if (c == '"' && i + 1 < line.size() && line[i + 1] == '"') {
        field += '"';
        ++i;
      } else if (c == '"') {
        quoted = false;
      } else {
        field += c;
      }
    } else if (c == '"') {
      quoted = true;
    } else if (c == ',') {
      out.push_back(trim(field));
      field.clear();
    } else {
      field += c;
    }
  }
  out.push_back(trim(field));
  return out;
}

class Table final : public IntervalMethod {
 public:
  explicit Table(const std::string& path) : path_(path) { read(); }

  double lower(int x, int n, double a_lo) const override {
    return find(x, n, 1 - a_lo, Side::lower_bound).lower;
  }
  double upper(int x, int n, double a_hi) const override {
    return find(x, n, 1 - a_hi, Side::upper_bound).upper;
  }
  RawLimits two_sided(int x, int n, double alpha) const override {
    const Row& r = find(x, n, 1 - alpha, Side::two_sided);
    return {r.lower, r.upper};
  }
  bool supports(Side side) const override { return !has_side_ || sides_[side_key(side)]; }
  bool symmetric() const override { return false; }
  bool limited_domain() const override { return true; }
  std::string missing(int n, double level, Side side) const override {
    for (int x = 0; x <= n; ++x)
      if (!lookup(x, n, level, side))
        return fmt::format("{} has no row for n = {}, x = {}{}{}", path_, n, x,
                           has_level_ ? fmt::format(", level = {:g}", level) : std::string(),
                           has_side_ ? fmt::format(", side = {}", side_name(side)) : std::string());
    return {};
  }

 private:
  const Row* lookup(int x, int n, double level, Side side) const {
    const Key key{n, x, has_level_ ? level_key(level) : any_level, has_side_ ? side_key(side) : any_side};
    const auto it = rows_.find(key);
    return it == rows_.end() ? nullptr : &it->second;
  }
  const Row& find(int x, int n, double level, Side side) const {
    if (const Row* r = lookup(x, n, level, side)) return *r;
    throw NumericalError(missing(n, level, side));
  }

  [[noreturn]] void fail(int line, const std::string& what) const {
    throw ParameterError("file", fmt::format("{}:{}: {}", path_, line, what));
  }

  void read() {
    std::ifstream in(path_, std::ios::binary);
    if (!in) throw ParameterError("file", fmt::format("{}: cannot open the interval table", path_));
    std::string text;
    int line_no = 0;
    std::map<std::string, std::size_t> column;
    std::size_t width = 0;
    while (std::getline(in, text)) {
      ++line_no;
      if (text.find('\0') != std::string::npos) fail(line_no, "holds a NUL byte: not a text table");
      const std::string t = trim(text);
      if (t.empty() || t.front() == '#') continue;
      const auto fields = fields_of(t);
      if (column.empty()) {
        for (std::size_t i = 0; i < fields.size(); ++i) {
          const std::string& name = fields[i];
          if (name != "n" && name != "x" && name != "lower" && name != "upper" && name != "level" &&
              name != "side")
            fail(line_no, fmt::format("column '{}' is not one of n, x, lower, upper, level, side", name));
          if (!column.emplace(name, i).second) fail(line_no, fmt::format("column '{}' is named twice", name));
        }
        for (const char* need : {"n", "x", "lower", "upper"})
          if (!column.count(need))
            fail(line_no, fmt::format("the header names no column '{}' (needed: n, x, lower, upper)", need));
        has_level_ = column.count("level") > 0;
        has_side_ = column.count("side") > 0;
        width = fields.size();
        continue;
      }
      if (fields.size() != width)
        fail(line_no, fmt::format("{} fields where the header names {}", fields.size(), width));
      auto number = [&](const char* name) {
        const std::string& f = fields[column.at(name)];
        char* end = nullptr;
        const double v = std::strtod(f.c_str(), &end);
        if (f.empty() || !end || *end != '\0' || !std::isfinite(v))
          fail(line_no, fmt::format("column '{}': \"{}\" is not a number", name, f));
        return v;
      };
      auto whole = [&](const char* name, double lo, double hi) {
        const double v = number(name);
        if (v != std::floor(v) || v < lo || v > hi)
          fail(line_no,
               fmt::format("column '{}': {:g} is not a whole number in {:g}..{:g}", name, v, lo, hi));
        return static_cast<int>(v);
      };
      const int n = whole("n", 1, 1e7);
      const int x = whole("x", 0, n);
      const double lower = number("lower"), upper = number("upper");
      for (const auto& [name, v] : {std::pair{"lower", lower}, std::pair{"upper", upper}})
        if (v < 0 || v > 1) fail(line_no, fmt::format("column '{}': {:g} is outside [0, 1]", name, v));
      if (lower > upper) fail(line_no, fmt::format("lower {:g} is above upper {:g}", lower, upper));
      long long level = any_level;
      if (has_level_) {
        const double l = number("level");
        if (!(l > 0 && l < 1)) fail(line_no, fmt::format("column 'level': {:g} is outside (0, 1)", l));
        level = level_key(l);
      }
      int side = any_side;
      if (has_side_) {
        Side s{};
        const std::string& f = fields[column.at("side")];
        if (!parse_side(f, s))
          fail(line_no,
               fmt::format("column 'side': \"{}\" is not one of two-sided, lower-bound, upper-bound", f));
        side = side_key(s);
        sides_[side] = true;
      }
      const auto [at, fresh] = rows_.emplace(Key{n, x, level, side}, Row{lower, upper, line_no});
      if (!fresh)
        fail(line_no, fmt::format("duplicates line {} (the same n, x, level and side)", at->second.line));
    }
    if (column.empty()) fail(line_no, "holds no header line (n, x, lower, upper[, level][, side])");
    if (rows_.empty()) fail(line_no, "holds no rows");
  }

  std::string path_;
  std::map<Key, Row> rows_;
  bool has_level_ = false, has_side_ = false;
  bool sides_[3] = {false, false, false};
};

}  // namespace

MethodEntry table_entry() {
  return {{"table",
           "interval table (a black-box procedure)",
           Family::user_table,
           {{"file",
             ParamSpec::Kind::path,
             std::string(),
             "the CSV file of limits: columns n, x, lower, upper[, level][, side]",
             {},
             0.0,
             0.0,
             false}},
           "the procedure that wrote the table",
           "limits read from a CSV file, one row per (n, x[, level][, side]); one-sided: the row's lower "
           "(upper) limit"},
          [](const ParamValues& v) -> std::unique_ptr<IntervalMethod> {
            const auto it = v.find("file");
            const std::string path = it == v.end() ? std::string() : std::get<std::string>(it->second);
            if (path.empty())
              throw ParameterError("file", "method 'table' needs 'file', the CSV file of limits");
            return std::make_unique<Table>(path);
          }};
}

}  // namespace covergrid::methods
