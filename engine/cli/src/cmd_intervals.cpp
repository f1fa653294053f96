// covergrid intervals: every method's limits for observed data.
#include "commands.hpp"
#include "covergrid/scenarios/loader.hpp"

#include <fmt/format.h>

#include <memory>

namespace covergrid::cli {

namespace {

std::string fmt_limit(double v) { return fmt::format("{:.6f}", v); }

int cmd_intervals(int x, int n, double level, const std::string& side_text,
                  const std::vector<std::string>& method_texts, bool csv, std::ostream& out) {
  if (n < 1) throw InputError("N", fmt::format("N = {} must be at least 1", n));
  if (x < 0 || x > n) throw InputError("X", fmt::format("X = {} must lie in 0..N = 0..{}", x, n));
  if (!(level > 0 && level < 1)) throw InputError("--level", fmt::format("{} is outside (0, 1)", level));
  if (n > scenarios::max_sample_size)
    throw InputError(
        "N", fmt::format("N = {} is above the largest supported n ({})", n, scenarios::max_sample_size));
  methods::Side side{};
  if (!methods::parse_side(side_text, side))
    throw InputError("--side",
                     fmt::format("\"{}\" is not one of two-sided, lower-bound, upper-bound", side_text));
  std::vector<methods::MethodInstance> list;
  if (method_texts.empty())
    for (const auto& e : methods::registry()) list.push_back(methods::make_instance(e.info.id, {}));
  else
    for (const auto& t : method_texts) list.push_back(parse_method_option(t));
  std::size_t width = 6;
  for (const auto& m : list) width = std::max(width, m.label.size());
  if (csv)
    out << "method,x,n,level,side,lower,upper,raw_lower,raw_upper\n";
  else
    out << fmt::format("x = {}, n = {}, p^ = {:.6f}, {} at {}%\n\n  {:<{}}  {:>10}  {:>10}  {:>10}  note\n",
                       x, n, static_cast<double>(x) / n, side_text, fmt::format("{:g}", 100 * level),
                       "method", width, "lower", "upper", "width");
  for (const auto& m : list) {
    if (!m.method->supports(side)) {
      if (!csv)
        out << fmt::format("  {:<{}}  {:>10}  {:>10}  {:>10}  {} only\n", m.label, width, "-", "-", "-",
                           "two-sided");
      continue;
    }
    const auto lim = methods::interval(*m.method, x, n, level, side);
    if (csv) {
      out << fmt::format("\"{}\",{},{},{},{},{:.17g},{:.17g},{:.17g},{:.17g}\n", m.label, x, n, level,
                         side_text, lim.lower, lim.upper, lim.raw_lower, lim.raw_upper);
    } else {
      std::string note;
      if (lim.raw_lower < 0 || lim.raw_upper > 1)
        note = fmt::format("clipped from [{:.4f}, {:.4f}]", lim.raw_lower, lim.raw_upper);
      if (lim.upper == lim.lower) note += note.empty() ? "zero width" : "; zero width";
      out << fmt::format("  {:<{}}  {:>10}  {:>10}  {:>10}  {}\n", m.label, width, fmt_limit(lim.lower),
                         fmt_limit(lim.upper), fmt_limit(lim.upper - lim.lower), note);
    }
  }
  if (!csv)
    out << "\nA confidence interval comes from a procedure whose coverage is a long-run property;\n"
           "see `covergrid run` for how each method's coverage behaves at this n.\n";
  return exit_ok;
}

struct IntervalsArgs {
  int x = 0, n = 0;
  double level = 0.95;
  std::string side = "two-sided";
  std::vector<std::string> methods;
  bool csv = false;
};

}  // namespace

Command add_intervals_command(CLI::App& app) {
  auto a = std::make_shared<IntervalsArgs>();
  auto* intervals =
      app.add_subcommand("intervals", "Every method's limits for observed data X successes in N trials");
  intervals->add_option("X", a->x, "observed successes")->required();
  intervals->add_option("N", a->n, "trials")->required();
  intervals->add_option("--level", a->level, "confidence level in (0, 1) (default 0.95)");
  intervals->add_option("--side", a->side, "two-sided, lower-bound or upper-bound (default two-sided)");
  intervals->add_option("--method", a->methods,
                        "method id, optionally id:key=value,... (repeatable; default all)");
  intervals->add_flag("--csv", a->csv, "CSV output with raw (unclipped) limits");
  return {intervals, [a](std::ostream& out, std::ostream&) {
            return cmd_intervals(a->x, a->n, a->level, a->side, a->methods, a->csv, out);
          }};
}

}  // namespace covergrid::cli
