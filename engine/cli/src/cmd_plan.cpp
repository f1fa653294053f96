// covergrid plan: the smallest n meeting coverage, width or margin
// requirements, per method, by the exact engine (no cube is written).
#include "commands.hpp"
#include "progress.hpp"
#include "covergrid/cli/cli.hpp"
#include "covergrid/engine/sample_size.hpp"
#include "covergrid/output/tables.hpp"

#include <fmt/format.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <memory>

namespace covergrid::cli {

namespace {

struct PlanArgs {
  std::vector<std::string> methods;
  double level = 0;
  std::string side = "two-sided", p, n = "1:5000", format = "text", model;
  double min_coverage = -1, mean_coverage = -1, max_width = -1, max_margin = -1;
  int threads = 0;
  bool quiet = false, yes = false;
};

std::string figures_text(const engine::PlanFigures& f) {
  return fmt::format(
      "infimum {:.6f} (p = {:.6g}), mean {:.6f}, largest expected width {:.6f} (p = {:.4g}), "
      "largest margin {:.6f}",
      f.inf_coverage, f.inf_coverage_p, f.mean_coverage, f.max_width, f.max_width_p, f.max_margin);
}

/// The line under an answer whose exact infimum of coverage is far below
/// nominal (engine::coverage_far_below), else nothing.
std::string coverage_mark(const engine::PlanFigures& f, const engine::PlanRequest& q) {
  if (!engine::coverage_far_below(f, q.level)) return {};
  return fmt::format(
      "      !! coverage far below nominal: the exact infimum over p in [{:g}, {:g}] at n = {} is {:.6f} "
      "(p = {:.6g}),\n         below nominal - {:g} = {:.6g}\n",
      q.p_lo, q.p_hi, f.n, f.inf_coverage, f.inf_coverage_p, engine::coverage_warning_depth(q.level),
      q.level - engine::coverage_warning_depth(q.level));
}

/// The search's position on stderr, redrawn in place (a terminal only).
class PlanProgressLine {
 public:
  PlanProgressLine(std::ostream& err, bool show) : err_(err), show_(show) {}
  engine::PlanProgressFn callback(const engine::PlanRequest& q) {
    if (!show_) return {};
    start_ = std::chrono::steady_clock::now();
    last_ = -1;
    return [this, &q](const engine::PlanProgress& p) {
      const double s = std::chrono::duration<double>(std::chrono::steady_clock::now() - start_).count();
      if (s - last_ < 0.2) return;  // a few redraws a second, not one per block
      last_ = s;
      err_ << fmt::format("\rplan {}: n {}..{}, {} at n = {}, {} n decided, {:.0f} s   ", q.method.label,
                          q.n_from, q.n_to,
                          p.downward ? "\"every n from\" scanning down" : "\"first n\" scanning up", p.n,
                          p.evaluated, s)
           << std::flush;
      drawn_ = true;
    };
  }
  void clear() {
    if (drawn_) err_ << '\r' << std::string(110, ' ') << '\r' << std::flush;
    drawn_ = false;
  }

 private:
  std::ostream& err_;
  bool show_, drawn_ = false;
  std::chrono::steady_clock::time_point start_;
  double last_ = -1;  // seconds at the last redraw
};

int cmd_plan(const PlanArgs& a, const CLI::App& app, std::ostream& out, std::ostream& err) {
  if (a.methods.empty()) throw InputError("--method", "is required (repeat it to compare methods)");
  if (app.count("--level") == 0) throw InputError("--level", "is required (e.g. --level 0.95)");
  if (a.format != "text" && a.format != "csv")
    throw InputError("--format", fmt::format("\"{}\" is not one of text, csv", a.format));
  engine::PlanRequest base;
  check_level(a.level, "--level");
  base.level = a.level;
  base.side = parse_side_option(a.side, "--side");
  {
    if (a.n.find(':') == std::string::npos || a.n.find(':') != a.n.rfind(':'))
      throw InputError("--n " + a.n, "the search range is written A:B, e.g. 1:5000");
    const auto set = parse_n_set(a.n, "--n");
    base.n_from = set.front();
    base.n_to = set.back();
  }
  auto add = [&](const char* option, double value, engine::Requirement r, bool coverage) {
    if (app.count(option) == 0) return;
    if (coverage ? !(value > 0 && value < 1) : !(value > 0 && value <= 1))
      throw InputError(option, fmt::format("{:g} is outside {}", value, coverage ? "(0, 1)" : "(0, 1]"));
    base.requirements.emplace_back(r, value);
  };
  add("--min-coverage", a.min_coverage, engine::Requirement::min_coverage, true);
  add("--mean-coverage", a.mean_coverage, engine::Requirement::mean_coverage, true);
  add("--max-width", a.max_width, engine::Requirement::max_width, false);
  add("--max-margin", a.max_margin, engine::Requirement::max_margin, false);
  if (base.requirements.empty())
    throw InputError("plan",
                     "state at least one of --min-coverage, --mean-coverage, --max-width, --max-margin");
  // The largest margin over x does not depend on p: a margin-only plan needs
  // no --p and judges the coverage it reports over [0, 1].
  bool margin_only = true;
  std::string needs_p;
  for (const auto& [r, v] : base.requirements)
    if (r != engine::Requirement::max_margin) {
      margin_only = false;
      if (needs_p.empty()) needs_p = fmt::format("--{}", engine::requirement_name(r));
    }
  if (a.p.empty() && !margin_only)
    throw InputError(
        "--p",
        fmt::format("is required with {} (the p-range it must hold over, e.g. --p 0.05:0.95)", needs_p));
  std::tie(base.p_lo, base.p_hi) = parse_p_range(a.p.empty() ? std::string("0:1") : a.p, "--p");
  if (!a.model.empty()) {
    base.model = parse_model_option(a.model);
    // plan searches every n of the range, so the model must draw each (a
    // clustered model, which draws only multiples of its cluster size, is
    // refused unless its clusters are single units).
    std::vector<int> range;
    for (int n = base.n_from; n <= base.n_to; ++n) range.push_back(n);
    if (const std::string why = engine::refused_n(*base.model, range); !why.empty())
      throw InputError(
          "--model " + a.model,
          fmt::format("cannot draw every n of the search range --n (plan searches each): {}", why));
  }
  std::vector<engine::PlanRequest> requests;
  for (const auto& m : a.methods) {
    engine::PlanRequest q = base;
    q.method = parse_method_option(m);
    if (!q.method.method->supports(q.side))
      throw InputError("--method " + m,
                       fmt::format("{} does not define the side {}", q.method.label, a.side));
    if (q.method.method->limited_domain()) {
      std::vector<int> ns;
      for (int n = q.n_from; n <= q.n_to; ++n) ns.push_back(n);
      const std::vector<double> levels = {q.level};
      const std::vector<methods::Side> sides = {q.side};
      if (const std::string why = methods::missing_limits(q.method, ns, levels, sides); !why.empty())
        throw InputError("--method " + m, fmt::format("{} (plan searches every n of --n)", why));
    }
    requests.push_back(std::move(q));
  }
  // Up-front estimate, an upper bound: every n of the range decided, for
  // every method (the search usually decides far fewer). A large one needs
  // --yes.
  engine::WorkEstimate total;
  for (const auto& q : requests) total.add(engine::estimate_plan(q, a.threads));
  check_large_work("plan", total, a.yes, "narrow the --n search range");
  if (!a.quiet && (isatty(STDERR_FILENO) != 0 || total.seconds >= show_estimate_seconds))
    err << fmt::format("covergrid: plan over n {}..{}, {} method{}: at most {}\n", base.n_from, base.n_to,
                       requests.size(), requests.size() == 1 ? "" : "s", work_estimate_text(total))
        << std::flush;
  std::string reqs;
  for (const auto& [r, v] : base.requirements)
    reqs += fmt::format("{}{} {:g}", reqs.empty() ? "" : ", ", engine::requirement_name(r), v);
  const bool csv = a.format == "csv";
  if (csv)
    out << "method,answer,n,inf_coverage,inf_coverage_p,mean_coverage,max_width,max_width_p,max_margin,"
           "coverage_far_below\n";
  else
    out << fmt::format("Plan: {} at {:g} % ({}), p in [{:g}, {:g}]{}, n searched {}..{}, {} model\n\n", reqs,
                       100 * base.level, a.side, base.p_lo, base.p_hi,
                       a.p.empty() ? " (no --p: the coverage figures are over all p)" : "", base.n_from,
                       base.n_to, base.model->label());
  const bool precision = std::any_of(base.requirements.begin(), base.requirements.end(), [](const auto& r) {
    return r.first == engine::Requirement::max_margin || r.first == engine::Requirement::max_width;
  });
  PlanProgressLine progress(err, !a.quiet && isatty(STDERR_FILENO) != 0);
  std::vector<std::pair<std::string, engine::PlanResult>> results;
  bool any_none = false;
  for (const auto& q : requests) {
    const engine::PlanResult r = engine::plan_sample_size(q, a.threads, progress.callback(q));
    progress.clear();
    results.emplace_back(q.method.label, r);
    any_none = any_none || !r.found;
    if (csv) {
      auto row = [&](const char* which, bool found, const engine::PlanFigures& f) {
        if (!found) {
          out << fmt::format("\"{}\",{},,,,,,,,\n", q.method.label, which);
          return;
        }
        out << fmt::format("\"{}\",{},{},{},{},{},{},{},{},{}\n", q.method.label, which, f.n,
                           output::csv_number(f.inf_coverage), output::csv_number(f.inf_coverage_p),
                           output::csv_number(f.mean_coverage), output::csv_number(f.max_width),
                           output::csv_number(f.max_width_p), output::csv_number(f.max_margin),
                           engine::coverage_far_below(f, q.level) ? 1 : 0);
      };
      row("first", r.found, r.first);
      row("from", r.stable_found, r.stable);
      continue;
    }
    out << q.method.label << '\n';
    if (r.found) {
      out << fmt::format("  first n that meets it: {:>7}   {}\n", r.first.n, figures_text(r.first));
      out << coverage_mark(r.first, q);
    } else {
      out << fmt::format("  no n in {}..{} meets it; at n = {}: {}\n", q.n_from, q.n_to, q.n_to,
                         figures_text(r.at_end));
      if (precision && r.at_end.zero_width_x >= 0)
        out << fmt::format(
            "  at n = {} the interval at x = {} has zero width ({} of the {} outcomes do), and a zero-width\n"
            "  interval meets no width or margin requirement\n",
            q.n_to, r.at_end.zero_width_x, r.at_end.zero_width_count, q.n_to + 1);
    }
    if (r.stable_found) {
      out << fmt::format("  every n from           {:>7}   {}\n", r.stable.n, figures_text(r.stable));
      if (r.stable.n != r.first.n) out << coverage_mark(r.stable, q);
    } else if (r.found)
      out << fmt::format("  n = {} (the end of the search range) does not meet it: no n from which all do\n",
                         q.n_to);
    out << '\n';
  }
  if (!csv) {
    if (results.size() > 1) {
      std::size_t width = 6;
      for (const auto& [label, r] : results) width = std::max(width, label.size());
      out << fmt::format("  {:<{}}  {:>8}  {:>8}\n", "method", width, "first n", "from n");
      for (const auto& [label, r] : results)
        out << fmt::format("  {:<{}}  {:>8}  {:>8}\n", label, width,
                           r.found ? std::to_string(r.first.n) : "-",
                           r.stable_found ? std::to_string(r.stable.n) : "-");
      out << '\n';
    }
    out << "Coverage oscillates in n: the first n can meet a coverage requirement while some larger n fail "
           "it;\n"
           "\"every n from\" is safe throughout the search range. The margin is the largest over every "
           "outcome\n"
           "x = 0..n (half the width two-sided, estimate to limit one-sided), so it does not depend on p.\n"
           "An n at which some outcome gives a zero-width interval meets no width or margin requirement.\n"
        << fmt::format(
               "\"!!\" marks an answer whose exact infimum of coverage over the p-range is below "
               "nominal - {:g}.\n",
               engine::coverage_warning_depth(base.level))
        << output::wrap_text(output::coverage_caution, 100);
  }
  return any_none ? exit_no_n : exit_ok;
}

}  // namespace

Command add_plan_command(CLI::App& app) {
  auto a = std::make_shared<PlanArgs>();
  auto* plan = app.add_subcommand("plan", "The smallest n meeting coverage, width or margin requirements");
  plan->add_option("--method", a->methods, "method id, optionally id:key=value,... (repeat to compare)");
  plan->add_option("--level", a->level, "nominal confidence level in [1e-6, 1 - 1e-12]");
  plan->add_option("--model", a->model,
                   "sampling model planned under: binomial (default) or kind:key=value,..., e.g. "
                   "hypergeometric:population=5000 (the search range must not pass N)");
  plan->add_option("--side", a->side, "two-sided, lower-bound or upper-bound (default two-sided)");
  plan->add_option("--p", a->p,
                   "true-proportion range LO:HI (or one value) the requirements must hold over; "
                   "optional when every requirement is --max-margin (default 0:1 then)");
  plan->add_option("--n", a->n, "search range A:B (default 1:5000)");
  plan->add_option("--min-coverage", a->min_coverage, "exact infimum of coverage over the p range >= C");
  plan->add_option("--mean-coverage", a->mean_coverage, "mean coverage over p uniform on the range >= C");
  plan->add_option("--max-width", a->max_width, "expected width <= W at every p of the range");
  plan->add_option("--max-margin", a->max_margin, "largest margin of error over every outcome <= M");
  plan->add_option("--format", a->format, "text (default) or csv");
  plan->add_option("--threads", a->threads,
                   "worker threads (default: all cores); the answers do not depend on it")
      ->check(integer_in(1, 4096))
      ->type_name("1..4096");
  plan->add_flag("--quiet", a->quiet,
                 "no estimate or progress display (both on stderr; progress only on a terminal)");
  plan->add_flag("--yes", a->yes,
                 "start a large plan (estimated over 2 hours of wall time if every n of the range is "
                 "decided), which otherwise is refused");
  plan->footer(
      "A zero-width interval (U - L <= 1e-12, e.g. Wald's [0, 0] at x = 0) claims a certainty the data "
      "cannot\n"
      "give: an n at which any outcome x = 0..n gives one meets no --max-width or --max-margin requirement.\n"
      "Each answer shows the exact infimum of coverage over the p-range (over [0, 1] without --p), marked\n"
      "\"!!\" when it is below nominal - (1 - level)/5 (0.01 at 95 %).\n"
      "Exit status: 0 every method has an n that meets the requirements, 5 some method has none in the\n"
      "search range, 2 bad input, 1 internal failure.\n\n" +
      output::wrap_text(output::coverage_caution, 100));
  return {plan, [a, plan](std::ostream& out, std::ostream& err) { return cmd_plan(*a, *plan, out, err); }};
}

}  // namespace covergrid::cli
