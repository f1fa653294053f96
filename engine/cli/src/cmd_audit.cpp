// covergrid audit: verdicts on nominal-coverage claims, from options or a
// claims file; exit 0 all hold, 3 some claim refuted, 4 none refuted but
// some inconclusive (simulated claims).
#include "commands.hpp"
#include "progress.hpp"
#include "covergrid/engine/output_location.hpp"
#include "covergrid/engine/audit.hpp"
#include "covergrid/output/tables.hpp"
#include "covergrid/output/verdicts.hpp"
#include "covergrid/scenarios/claims.hpp"
#include "covergrid/scenarios/loader.hpp"

#include <fmt/format.h>

#include <unistd.h>

#include <memory>
#include <mutex>

namespace covergrid::cli {

namespace {

struct AuditArgs {
  std::string claims_file;
  std::string method, model, n, p, side = "two-sided", about = "minimum", format = "text", output;
  double level = 0, tolerance = 0, confidence = 0.95;
  std::int64_t replicates = 0, p_points = 101, seed = 0;
  int threads = 0;
  bool yes = false, quiet = false;
};

engine::Claim claim_from_options(const AuditArgs& a, const CLI::App& app) {
  if (a.method.empty()) throw InputError("--method", "is required without --claims (e.g. --method wilson)");
  if (app.count("--level") == 0)
    throw InputError("--level", "is required without --claims (e.g. --level 0.95)");
  if (a.n.empty()) throw InputError("--n", "is required without --claims (e.g. --n 30:100)");
  if (a.p.empty()) throw InputError("--p", "is required without --claims (e.g. --p 0.01:0.99)");
  engine::Claim c;
  c.method = parse_method_option(a.method);
  check_level(a.level, "--level");
  c.level = a.level;
  c.side = parse_side_option(a.side, "--side");
  if (!c.method.method->supports(c.side))
    throw InputError("--side", fmt::format("{} does not define the side {}", c.method.label, a.side));
  c.n = parse_n_set(a.n, "--n");
  {
    const std::vector<double> levels = {c.level};
    const std::vector<methods::Side> sides = {c.side};
    if (const std::string why = methods::missing_limits(c.method, c.n, levels, sides); !why.empty())
      throw InputError("--method " + a.method, why);
  }
  if (!a.model.empty()) {
    c.model = parse_model_option(a.model);
    if (const std::string why = engine::refused_n(*c.model, c.n); !why.empty())
      throw InputError("--model " + a.model, fmt::format("cannot draw every n of --n: {}", why));
  }
  std::tie(c.p_lo, c.p_hi) = parse_p_range(a.p, "--p");
  if (!(a.tolerance >= 0))
    throw InputError("--tolerance", fmt::format("{:g} must not be negative", a.tolerance));
  if (!(a.tolerance < a.level))
    throw InputError("--tolerance",
                     fmt::format("{:g} is not below the level: the claim would say nothing", a.tolerance));
  c.tolerance = a.tolerance;
  if (a.about == "minimum")
    c.kind = engine::ClaimKind::minimum;
  else if (a.about == "mean")
    c.kind = engine::ClaimKind::mean;
  else
    throw InputError("--about", fmt::format("\"{}\" is not one of minimum, mean", a.about));
  if (a.replicates < 0) throw InputError("--replicates", "must not be negative");
  // One limit for options and claims files (and scenario files).
  if (a.replicates > scenarios::max_replicates_per_cell)
    throw InputError("--replicates", fmt::format("{} is above the largest supported count per cell ({})",
                                                 a.replicates, scenarios::max_replicates_per_cell));
  c.replicates = static_cast<std::uint64_t>(a.replicates);
  if (c.replicates == 0 && methods::under_design(c.method.method, c.model->design())->needs_clusters())
    throw InputError("--method " + a.method,
                     fmt::format("{} needs each cluster's count under the model {}, which only simulation "
                                 "draws: give --replicates (e.g. 20000)",
                                 c.method.label, c.model->label()));
  if (a.p_points < 2 || static_cast<std::size_t>(a.p_points) > scenarios::max_claim_p_points)
    throw InputError("--p-points",
                     fmt::format("{} is outside 2..{}", a.p_points, scenarios::max_claim_p_points));
  c.p_points = static_cast<std::size_t>(a.p_points);
  if (!(a.confidence > 0 && a.confidence < 1))
    throw InputError("--confidence", fmt::format("{:g} is outside (0, 1)", a.confidence));
  c.confidence = a.confidence;
  if (a.seed < 0) throw InputError("--seed", "must not be negative");
  c.seed = static_cast<std::uint64_t>(a.seed);
  c.name = fmt::format("{} {:g} % {} {} coverage", c.method.label, 100 * c.level, methods::side_name(c.side),
                       a.about);
  return c;
}

int cmd_audit(const AuditArgs& a, const CLI::App& app, std::ostream& out, std::ostream& err) {
  output::VerdictFormat format{};
  if (a.format == "text")
    format = output::VerdictFormat::text;
  else if (a.format == "csv")
    format = output::VerdictFormat::csv;
  else if (a.format == "json")
    format = output::VerdictFormat::json;
  else
    throw InputError("--format", fmt::format("\"{}\" is not one of text, csv, json", a.format));
  if (!a.output.empty())
    for (const std::string& problem :
         {engine::output_location_problem(a.output),
          engine::replacement_problem(a.output, {a.claims_file}, engine::Replaces::text)})
      if (!problem.empty()) throw InputError("-o " + a.output, problem);
  std::vector<engine::Claim> claims;
  if (!a.claims_file.empty()) {
    for (const char* opt : {"--method", "--model", "--level", "--n", "--p", "--side", "--tolerance",
                            "--about", "--replicates", "--p-points", "--confidence", "--seed"})
      if (app.count(opt) > 0) throw InputError(opt, "goes with a claim from options, not with --claims");
    claims = scenarios::load_claims_file(a.claims_file);
  } else {
    claims.push_back(claim_from_options(a, app));
  }
  // Up-front estimate: every claim's per-n work, probed (about half a
  // second at most per claim); a large audit needs --yes.
  engine::WorkEstimate total;
  std::vector<engine::WorkEstimate> estimates;
  std::size_t n_total = 0;
  for (const auto& c : claims) {
    estimates.push_back(engine::estimate_audit(c, a.threads));
    total.add(estimates.back());
    n_total += c.n.size();
  }
  check_large_work("audit", total, a.yes, "narrow the claims' n ranges (or their replicates)");
  const bool tty = isatty(STDERR_FILENO) != 0;
  if (!a.quiet && (tty || total.seconds >= show_estimate_seconds))
    err << fmt::format("covergrid: audit of {} claim{} over {} n: {}\n", claims.size(),
                       claims.size() == 1 ? "" : "s", n_total, work_estimate_text(total))
        << std::flush;
  // Progress (a terminal only): n done, the share weighted by each n's
  // estimated cost.
  Progress progress(err, a.quiet || !tty, tty, "n");
  std::mutex done_mutex;
  std::size_t n_done = 0;
  double cost_done = 0, cost_total = 0;
  for (std::size_t k = 0; k < claims.size(); ++k)
    for (int n : claims[k].n) cost_total += estimates[k].cost(n);
  std::vector<engine::Verdict> verdicts;
  for (std::size_t k = 0; k < claims.size(); ++k) {
    const engine::WorkEstimate& e = estimates[k];
    verdicts.push_back(engine::audit_claim(claims[k], a.threads, [&](int n) {
      std::size_t done = 0;
      double frac = 0;
      {
        const std::lock_guard<std::mutex> lock(done_mutex);
        done = ++n_done;
        cost_done += e.cost(n);
        frac = cost_total > 0 ? std::min(1.0, cost_done / cost_total) : 0.0;
      }
      progress.update(done, n_total, frac);
    }));
  }
  progress.done();
  const std::string table = output::verdict_table(claims, verdicts, format);
  if (a.output.empty())
    out << table;
  else
    output::write_text_atomically(a.output, table);
  bool refuted = false, inconclusive = false;
  for (const auto& v : verdicts) {
    refuted |= v.outcome == engine::Outcome::refuted;
    inconclusive |= v.outcome == engine::Outcome::inconclusive;
  }
  return refuted ? exit_refuted : inconclusive ? exit_inconclusive : exit_ok;
}

}  // namespace

Command add_audit_command(CLI::App& app) {
  auto a = std::make_shared<AuditArgs>();
  auto* audit = app.add_subcommand(
      "audit",
      "Verdict on a coverage claim: holds (exit 0), refuted (3, with the worst case) or inconclusive (4)");
  audit->add_option("--claims,--scenario", a->claims_file,
                    "claims file (TOML) holding one or more [[claim]]");
  audit->add_option("--method", a->method, "method id, optionally id:key=value,...");
  audit->add_option("--model", a->model,
                    "sampling model judged under: binomial (default) or kind:key=value,..., e.g. "
                    "hypergeometric:population=5000");
  audit->add_option("--level", a->level, "nominal confidence level in [1e-6, 1 - 1e-12]");
  audit->add_option("--side", a->side, "two-sided, lower-bound or upper-bound (default two-sided)");
  audit->add_option("--n", a->n, "sample sizes: A:B, A:B:STEP or a list A,B,C");
  audit->add_option("--p", a->p, "true-proportion range LO:HI (or one value)");
  audit->add_option("--tolerance", a->tolerance, "the claim is coverage >= level - tolerance (default 0)");
  audit->add_option("--about", a->about,
                    "minimum (default: the infimum over p) or mean (over p uniform on the range)");
  audit->add_option("--replicates", a->replicates,
                    "judge by Monte Carlo with this many replicates per cell instead of exact sums");
  audit->add_option("--p-points", a->p_points, "Monte Carlo: p points across the range (default 101)");
  audit->add_option("--confidence", a->confidence,
                    "Monte Carlo: simultaneous confidence of the bounds (default 0.95)");
  audit->add_option("--seed", a->seed, "Monte Carlo: stream key (default 0)");
  audit->add_option("--format", a->format, "text (default), csv or json");
  audit->add_option("-o,--output", a->output, "write the verdict table to this file instead of stdout");
  audit->add_flag("--yes", a->yes,
                  "start a large audit (estimated over 2 hours of wall time), which otherwise is refused");
  audit->add_flag("--quiet", a->quiet,
                  "no estimate or progress display (both on stderr; progress only on a terminal)");
  audit->add_option("--threads", a->threads, "worker threads (default: all cores)")
      ->check(integer_in(1, 4096))
      ->type_name("1..4096");
  audit->footer(
      "Exact claims (the default) are decided with the exact continuous infimum (or exact mean) of the "
      "binomial\n"
      "coverage; simulated claims with Clopper-Pearson bounds made simultaneous by Bonferroni over every "
      "cell.\n\n" +
      output::wrap_text(output::coverage_caution, 100));
  return {audit,
          [a, audit](std::ostream& out, std::ostream& err) { return cmd_audit(*a, *audit, out, err); }};
}

}  // namespace covergrid::cli
