// covergrid intervals: every method's limits for observed data.
#include "commands.hpp"
#include "covergrid/output/tables.hpp"
#include "covergrid/scenarios/loader.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <charconv>
#include <cmath>
#include <memory>
#include <optional>

namespace covergrid::cli {

namespace {

std::string fmt_limit(double v) { return fmt::format("{:.6f}", v); }

/// Columns of the text drawing of [0, 1].
constexpr int drawing_columns = 40;

/// A text drawing of the interval on [0, 1]: '.' outside it, '=' inside,
/// '[' and ']' at its ends, 'o' at the observed share, '|' for an interval of
/// zero width; framed by the ends of [0, 1].
std::string drawing(double lower, double upper, double share) {
  auto col = [](double v) {
    return std::clamp(static_cast<int>(std::lround(v * (drawing_columns - 1))), 0, drawing_columns - 1);
  };
  std::string d(drawing_columns, '.');
  const int a = col(lower), b = col(upper);
  for (int c = a; c <= b; ++c) d[static_cast<std::size_t>(c)] = '=';
  if (upper - lower <= 0) {
    d[static_cast<std::size_t>(a)] = '|';
  } else {
    d[static_cast<std::size_t>(a)] = '[';
    d[static_cast<std::size_t>(b)] = ']';
  }
  const int o = col(share);
  if (o > a && o < b) d[static_cast<std::size_t>(o)] = 'o';
  return "0 " + d + " 1";
}

/// The notes on one interval: zero width, limits clipped to [0, 1].
std::string notes(const methods::Limits& lim) {
  std::vector<std::string> parts;
  if (lim.upper - lim.lower <= 0) parts.push_back("zero width: covers only the point itself");
  if (lim.raw_lower < 0) parts.push_back(fmt::format("lower clipped from {:.4f}", lim.raw_lower));
  if (lim.raw_upper > 1) parts.push_back(fmt::format("upper clipped from {:.4f}", lim.raw_upper));
  std::string s;
  for (const auto& p : parts) s += (s.empty() ? "" : "; ") + p;
  return s;
}

/// The guarantee groups, in the order shown.
enum class Group { guaranteed, approximate, bayesian, unknown };

Group group_of(const methods::MethodInfo& info) {
  if (info.guaranteed) return Group::guaranteed;
  if (info.family == methods::Family::bayesian) return Group::bayesian;
  if (info.family == methods::Family::user_table) return Group::unknown;
  return Group::approximate;
}

std::string group_heading(Group g, double level) {
  switch (g) {
    case Group::guaranteed:
      return fmt::format("Guaranteed: coverage at least {:g} % at every p (inversion of exact tail tests)",
                         100 * level);
    case Group::approximate:
      return fmt::format("Approximate: coverage near {:g} % on average over p, below it at some p",
                         100 * level);
    case Group::bayesian:
      return "Bayesian: posterior intervals, read as confidence intervals; no coverage guarantee";
    case Group::unknown:
      return "Tables: limits read from a file; what they promise is what `covergrid audit` finds";
  }
  return "";
}

/// The cluster counts of --clusters "y1,y2,...": m clusters of k = n / m,
/// each count in 0..k, summing to x.
methods::ClusterCounts parse_clusters(const std::string& text, int x, int n) {
  std::vector<long long> y;
  std::size_t at = 0;
  while (at <= text.size()) {
    const std::size_t comma = std::min(text.find(',', at), text.size());
    const std::string item = text.substr(at, comma - at);
    long long v = -1;
    const auto [end, ec] = std::from_chars(item.data(), item.data() + item.size(), v);
    if (item.empty() || ec != std::errc() || end != item.data() + item.size() || v < 0)
      throw InputError("--clusters",
                       fmt::format("\"{}\" is not a count (a whole number from 0); give each cluster's "
                                   "successes, e.g. --clusters 2,0,5,1",
                                   item));
    y.push_back(v);
    at = comma + 1;
  }
  const auto m = static_cast<long long>(y.size());
  if (n % m != 0)
    throw InputError("--clusters",
                     fmt::format("{} clusters cannot share N = {} equally (clusters of one size)", m, n));
  const long long k = n / m;
  long long sum = 0;
  double squares = 0;
  for (std::size_t i = 0; i < y.size(); ++i) {
    if (y[i] > k)
      throw InputError("--clusters",
                       fmt::format("cluster {} has {} successes, more than its {} units (N / {} "
                                   "clusters)",
                                   i + 1, y[i], k, m));
    sum += y[i];
    squares += static_cast<double>(y[i] * y[i]);
  }
  if (sum != x) throw InputError("--clusters", fmt::format("the counts sum to {}, not to X = {}", sum, x));
  return {static_cast<int>(m), static_cast<int>(k), squares};
}

int cmd_intervals(int x, int n, double level, const std::string& side_text,
                  const std::vector<std::string>& method_texts, const std::string& model_text,
                  const std::string& clusters_text, bool csv, std::ostream& out) {
  if (n < 1) throw InputError("N", fmt::format("N = {} must be at least 1", n));
  if (x < 0 || x > n) throw InputError("X", fmt::format("X = {} must lie in 0..N = 0..{}", x, n));
  check_level(level, "--level");
  if (n > scenarios::max_sample_size)
    throw InputError(
        "N", fmt::format("N = {} is above the largest supported n ({})", n, scenarios::max_sample_size));
  methods::Side side{};
  if (!methods::parse_side(side_text, side))
    throw InputError("--side",
                     fmt::format("\"{}\" is not one of two-sided, lower-bound, upper-bound", side_text));
  std::vector<methods::MethodInstance> list;
  if (method_texts.empty()) {
    for (const auto& e : methods::registry())  // a table needs its file: --method table:file=...
      if (methods::takes_defaults(e)) list.push_back(methods::make_instance(e.info.id, {}));
  } else {
    for (const auto& t : method_texts) {
      list.push_back(parse_method_option(t));
      const std::vector<int> ns = {n};
      const std::vector<double> levels = {level};
      const std::vector<methods::Side> sides = {side};
      if (const std::string why = methods::missing_limits(list.back(), ns, levels, sides); !why.empty())
        throw InputError("--method " + t, why);
    }
  }
  // Under a sampling model (a finite population, clusters), the
  // design-aware methods (finite-population corrections, the exact
  // hypergeometric interval, the design-effect forms) take its design; the
  // others are unchanged. Design-effect methods in clusters of more than one
  // unit need each cluster's count (--clusters).
  std::string drawn_from;
  methods::Design design;
  if (!model_text.empty()) {
    const auto model = parse_model_option(model_text);
    const std::vector<int> ns = {n};
    if (const std::string why = engine::refused_n(*model, ns); !why.empty())
      throw InputError("--model " + model_text, why);
    design = model->design();
    drawn_from = model->label();
  }
  std::optional<methods::ClusterCounts> clusters;
  std::string in_clusters;
  if (!clusters_text.empty()) {
    clusters = parse_clusters(clusters_text, x, n);
    if (!model_text.empty() && design.cluster_size != clusters->cluster_size)
      throw InputError(
          "--clusters",
          fmt::format("{} clusters of {} do not match the model {} (clusters of {})", clusters->clusters,
                      clusters->cluster_size, drawn_from, design.cluster_size));
    design.cluster_size = clusters->cluster_size;
    in_clusters = fmt::format(", in {} clusters of {}", clusters->clusters, clusters->cluster_size);
  }
  for (auto& m : list) m.method = methods::under_design(m.method, design);
  // The limits, or none for a method that needs cluster counts not given.
  auto limits_of = [&](const methods::IntervalMethod& method) -> std::optional<methods::Limits> {
    if (!method.needs_clusters()) return methods::interval(method, x, n, level, side);
    if (!clusters) return std::nullopt;
    return methods::clustered_interval(method, x, *clusters, level, side);
  };
  if (csv) {
    out << "method,x,n,level,side,lower,upper,raw_lower,raw_upper\n";
    for (const auto& m : list) {
      if (!m.method->supports(side)) continue;
      const auto found = limits_of(*m.method);
      if (!found) {  // needs the cluster counts: a row without limits
        out << fmt::format("\"{}\",{},{},{},{},,,,\n", m.label, x, n, output::csv_number(level), side_text);
        continue;
      }
      const auto lim = *found;
      out << fmt::format("\"{}\",{},{},{},{},{},{},{},{}\n", m.label, x, n, output::csv_number(level),
                         side_text, output::csv_number(lim.lower), output::csv_number(lim.upper),
                         output::csv_number(lim.raw_lower), output::csv_number(lim.raw_upper));
    }
    return exit_ok;
  }
  const double share = static_cast<double>(x) / n;
  std::size_t width = 6;
  for (const auto& m : list) width = std::max(width, m.label.size());
  out << fmt::format("{} success{} in {} trial{}, observed share {:.4f}: {} intervals at {:g} %{}\n", x,
                     x == 1 ? "" : "es", n, n == 1 ? "" : "s", share, side_text, 100 * level,
                     (drawn_from.empty() ? std::string() : ", drawn under " + drawn_from) + in_clusters);
  for (Group g : {Group::guaranteed, Group::approximate, Group::bayesian, Group::unknown}) {
    std::string block;
    for (const auto& m : list) {
      if (!m.entry || group_of(m.entry->info) != g) continue;
      if (!m.method->supports(side)) {
        block += fmt::format("  {:<{}}  defines only the two-sided interval\n", m.label, width);
        continue;
      }
      const auto found = limits_of(*m.method);
      if (!found) {
        block +=
            fmt::format("  {:<{}}  needs each cluster's count: give --clusters y1,y2,...\n", m.label, width);
        continue;
      }
      const auto lim = *found;
      const std::string note = notes(lim);
      block += fmt::format("  {:<{}}  {}  {}  {}  {}{}\n", m.label, width, fmt_limit(lim.lower),
                           fmt_limit(lim.upper), fmt_limit(lim.upper - lim.lower),
                           drawing(lim.lower, lim.upper, share), note.empty() ? "" : "  " + note);
    }
    if (!block.empty())
      out << '\n'
          << group_heading(g, level) << '\n'
          << fmt::format("  {:<{}}  {:>8}  {:>8}  {:>8}  {}\n", "method", width, "lower", "upper", "width",
                         "  the interval on [0, 1]")
          << block;
  }
  out << fmt::format(
      "\nDrawing: [0, 1] in {} columns, '=' the interval, 'o' the observed share, '|' an interval of zero "
      "width.\n",
      drawing_columns);
  out << "\n"
      << output::wrap_text(
             "The groups say what each procedure promises; `covergrid audit` and `covergrid run` show how "
             "its coverage behaves at this n. " +
                 (drawn_from.empty()
                      ? std::string()
                      : "Under " + drawn_from +
                            " the guarantees of the binomial exact intervals are proven for independent "
                            "draws; exact-hypergeometric's is proven for this population (check the others "
                            "with `covergrid audit --model`). ") +
                 std::string(output::coverage_caution),
             100);
  return exit_ok;
}

struct IntervalsArgs {
  int x = 0, n = 0;
  double level = 0.95;
  std::string side = "two-sided";
  std::vector<std::string> methods;
  std::string model;
  std::string clusters;
  bool csv = false;
};

}  // namespace

Command add_intervals_command(CLI::App& app) {
  auto a = std::make_shared<IntervalsArgs>();
  auto* intervals =
      app.add_subcommand("intervals", "Every method's limits for observed data X successes in N trials");
  intervals->add_option("X", a->x, "observed successes")->required();
  intervals->add_option("N", a->n, "trials")->required();
  intervals->add_option("--level", a->level, "confidence level in [1e-6, 1 - 1e-12] (default 0.95)");
  intervals->add_option("--side", a->side, "two-sided, lower-bound or upper-bound (default two-sided)");
  intervals->add_option("--method", a->methods,
                        "method id, optionally id:key=value,... (repeatable; default all)");
  intervals->add_option("--model", a->model,
                        "how the sample was drawn, e.g. hypergeometric:population=500 (a finite population: "
                        "fpc-wald, fpc-wilson and exact-hypergeometric use N; default binomial)");
  intervals->add_option(
      "--clusters", a->clusters,
      "the successes in each of m equal clusters (N = m k), e.g. 2,0,5,1: the design-effect "
      "methods estimate the design effect from them");
  intervals->add_flag("--csv", a->csv, "CSV output with raw (unclipped) limits");
  intervals->footer(
      "Methods are grouped by what they promise: guaranteed coverage (exact tail inversion), "
      "approximate, Bayesian. Each row draws the interval on [0, 1] against the observed share.\n\n" +
      output::wrap_text(output::coverage_caution, 100));
  return {intervals, [a](std::ostream& out, std::ostream&) {
            return cmd_intervals(a->x, a->n, a->level, a->side, a->methods, a->model, a->clusters, a->csv,
                                 out);
          }};
}

}  // namespace covergrid::cli
