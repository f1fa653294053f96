// covergrid plan: the smallest n meeting coverage, width or margin
// requirements, per method, by the exact engine (no cube is written).
#include "commands.hpp"
#include "covergrid/engine/sample_size.hpp"
#include "covergrid/output/tables.hpp"

#include <fmt/format.h>

#include <memory>

namespace covergrid::cli {

namespace {

struct PlanArgs {
  std::vector<std::string> methods;
  double level = 0;
  std::string side = "two-sided", p, n = "1:5000", format = "text";
  double min_coverage = -1, mean_coverage = -1, max_width = -1, max_margin = -1;
  int threads = 0;
};

std::string figures_text(const engine::PlanFigures& f) {
  return fmt::format(
      "infimum {:.6f} (p = {:.6g}), mean {:.6f}, largest expected width {:.6f} (p = {:.4g}), "
      "largest margin {:.6f}",
      f.inf_coverage, f.inf_coverage_p, f.mean_coverage, f.max_width, f.max_width_p, f.max_margin);
}

int cmd_plan(const PlanArgs& a, const CLI::App& app, std::ostream& out) {
  if (a.methods.empty()) throw InputError("--method", "is required (repeat it to compare methods)");
  if (app.count("--level") == 0) throw InputError("--level", "is required (e.g. --level 0.95)");
  if (a.p.empty()) throw InputError("--p", "is required (e.g. --p 0.05:0.95)");
  if (a.format != "text" && a.format != "csv")
    throw InputError("--format", fmt::format("\"{}\" is not one of text, csv", a.format));
  engine::PlanRequest base;
  check_level(a.level, "--level");
  base.level = a.level;
  base.side = parse_side_option(a.side, "--side");
  std::tie(base.p_lo, base.p_hi) = parse_p_range(a.p, "--p");
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
  std::vector<engine::PlanRequest> requests;
  for (const auto& m : a.methods) {
    engine::PlanRequest q = base;
    q.method = parse_method_option(m);
    if (!q.method.method->supports(q.side))
      throw InputError("--method " + m,
                       fmt::format("{} does not define the side {}", q.method.label, a.side));
    requests.push_back(std::move(q));
  }
  std::string reqs;
  for (const auto& [r, v] : base.requirements)
    reqs += fmt::format("{}{} {:g}", reqs.empty() ? "" : ", ", engine::requirement_name(r), v);
  const bool csv = a.format == "csv";
  if (csv)
    out << "method,answer,n,inf_coverage,inf_coverage_p,mean_coverage,max_width,max_width_p,max_margin\n";
  else
    out << fmt::format("Plan: {} at {:g} % ({}), p in [{:g}, {:g}], n searched {}..{}\n\n", reqs,
                       100 * base.level, a.side, base.p_lo, base.p_hi, base.n_from, base.n_to);
  std::vector<std::pair<std::string, engine::PlanResult>> results;
  for (const auto& q : requests) {
    const engine::PlanResult r = engine::plan_sample_size(q, a.threads);
    results.emplace_back(q.method.label, r);
    if (csv) {
      auto row = [&](const char* which, bool found, const engine::PlanFigures& f) {
        if (!found) {
          out << fmt::format("\"{}\",{},,,,,,,\n", q.method.label, which);
          return;
        }
        out << fmt::format("\"{}\",{},{},{:.17g},{:.17g},{:.17g},{:.17g},{:.17g},{:.17g}\n", q.method.label,
                           which, f.n, f.inf_coverage, f.inf_coverage_p, f.mean_coverage, f.max_width,
                           f.max_width_p, f.max_margin);
      };
      row("first", r.found, r.first);
      row("from", r.stable_found, r.stable);
      continue;
    }
    out << q.method.label << '\n';
    if (r.found)
      out << fmt::format("  first n that meets it: {:>7}   {}\n", r.first.n, figures_text(r.first));
    else
      out << fmt::format("  no n in {}..{} meets it\n", q.n_from, q.n_to);
    if (r.stable_found)
      out << fmt::format("  every n from           {:>7}   {}\n", r.stable.n, figures_text(r.stable));
    else if (r.found)
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
        << output::wrap_text(output::coverage_caution, 100);
  }
  return exit_ok;
}

}  // namespace

Command add_plan_command(CLI::App& app) {
  auto a = std::make_shared<PlanArgs>();
  auto* plan = app.add_subcommand("plan", "The smallest n meeting coverage, width or margin requirements");
  plan->add_option("--method", a->methods, "method id, optionally id:key=value,... (repeat to compare)");
  plan->add_option("--level", a->level, "nominal confidence level in (0, 1)");
  plan->add_option("--side", a->side, "two-sided, lower-bound or upper-bound (default two-sided)");
  plan->add_option("--p", a->p, "true-proportion range LO:HI (or one value) the requirement must hold over");
  plan->add_option("--n", a->n, "search range A:B (default 1:5000)");
  plan->add_option("--min-coverage", a->min_coverage, "exact infimum of coverage over the p range >= C");
  plan->add_option("--mean-coverage", a->mean_coverage, "mean coverage over p uniform on the range >= C");
  plan->add_option("--max-width", a->max_width, "expected width <= W at every p of the range");
  plan->add_option("--max-margin", a->max_margin, "largest margin of error over every outcome <= M");
  plan->add_option("--format", a->format, "text (default) or csv");
  plan->add_option("--threads", a->threads, "worker threads (default: all cores)")
      ->check(integer_in(1, 4096))
      ->type_name("1..4096");
  return {plan, [a, plan](std::ostream& out, std::ostream&) { return cmd_plan(*a, *plan, out); }};
}

}  // namespace covergrid::cli
