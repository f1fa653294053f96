#include "covergrid/cli/cli.hpp"

#include "covergrid/engine/error.hpp"
#include "covergrid/engine/interval_table.hpp"
#include "covergrid/engine/monte_carlo.hpp"
#include "covergrid/engine/run.hpp"
#include "covergrid/methods/registry.hpp"
#include "covergrid/output/cube.hpp"
#include "covergrid/output/tables.hpp"
#include "covergrid/scenarios/loader.hpp"
#include "covergrid/version.hpp"

#include <CLI/CLI.hpp>
#include <fmt/format.h>
#include <unistd.h>

#include <atomic>
#include <chrono>
#include <csignal>
#include <cmath>
#include <filesystem>
#include <ostream>

namespace covergrid::cli {

namespace {

namespace fs = std::filesystem;

std::atomic<bool> stop_requested{false};
extern "C" void on_stop_signal(int) { stop_requested.store(true); }

/// Parses "id" or "id:key=value,key=value" into a method instance.
methods::MethodInstance parse_method_option(const std::string& text) {
  const auto colon = text.find(':');
  const std::string id = text.substr(0, colon);
  methods::ParamValues given;
  if (colon != std::string::npos) {
    std::string rest = text.substr(colon + 1);
    std::size_t start = 0;
    while (start <= rest.size()) {
      const auto comma = rest.find(',', start);
      const std::string item = rest.substr(start, comma - start);
      const auto eq = item.find('=');
      if (eq == std::string::npos || eq == 0)
        throw InputError("--method " + text,
                         "parameters are written key=value, e.g. jeffreys:boundary=false");
      const std::string key = item.substr(0, eq), value = item.substr(eq + 1);
      if (value == "true" || value == "false")
        given[key] = value == "true";
      else {
        char* end = nullptr;
        const double d = std::strtod(value.c_str(), &end);
        if (end && *end == '\0' && !value.empty())
          given[key] = d;
        else
          given[key] = value;
      }
      if (comma == std::string::npos) break;
      start = comma + 1;
    }
  }
  try {
    return methods::make_instance(id, given);
  } catch (const methods::ParameterError& e) {
    throw InputError("--method " + text, e.what());
  }
}

std::string fmt_limit(double v) { return fmt::format("{:.6f}", v); }

/// Progress on stderr: redrawn in place on a terminal, a plain line every few
/// seconds otherwise.
class Progress {
 public:
  Progress(std::ostream& err, bool quiet, bool tty)
      : err_(err), quiet_(quiet), tty_(tty), start_(std::chrono::steady_clock::now()), last_(start_) {}
  void update(std::size_t done, std::size_t total) {
    if (quiet_) return;
    const auto now = std::chrono::steady_clock::now();
    if (!started_) {
      // The rate counts from the start of the run; resumed cells do not count.
      start_done_ = resumed_;
      started_ = true;
    }
    const double elapsed = std::chrono::duration<double>(now - start_).count();
    if (!tty_ && done < total && std::chrono::duration<double>(now - last_).count() < 5.0) return;
    last_ = now;
    const double rate = elapsed > 0 ? static_cast<double>(done - start_done_) / elapsed : 0.0;
    const double left = rate > 0 ? static_cast<double>(total - done) / rate : 0.0;
    const double frac = total ? static_cast<double>(done) / static_cast<double>(total) : 1.0;
    std::string line;
    if (tty_) {
      const int bar = 28, filled = static_cast<int>(frac * bar);
      line =
          fmt::format("\r[{}{}] {:5.1f}%  {}/{} cells  {:.3g} cells/s  {} left  ", std::string(filled, '#'),
                      std::string(bar - filled, '.'), 100 * frac, done, total, rate, duration(left));
    } else {
      line = fmt::format("progress: {}/{} cells ({:.1f}%), {:.3g} cells/s, about {} left\n", done, total,
                         100 * frac, rate, duration(left));
    }
    err_ << line << std::flush;
  }
  void done() {
    if (!quiet_ && tty_ && started_) err_ << '\n';
  }

 private:
  static std::string duration(double s) {
    if (s < 90) return fmt::format("{:.0f}s", s);
    if (s < 5400) return fmt::format("{:.0f}min", s / 60);
    return fmt::format("{:.1f}h", s / 3600);
  }
  std::ostream& err_;
  bool quiet_, tty_, started_ = false;
  std::chrono::steady_clock::time_point start_, last_;
  std::size_t start_done_ = 0;

 public:
  std::size_t resumed_ = 0;  // cells already done when the run started
};

int cmd_run(const std::string& file, int threads, bool quiet, bool overwrite, std::ostream& out,
            std::ostream& err) {
  engine::Scenario scenario =
      file.empty() ? scenarios::load_scenario_text(scenarios::bundled_demo_text(), "<bundled demo>", "")
                   : scenarios::load_scenario_file(file);
  if (file.empty() && !quiet) err << "covergrid: no scenario given; running the bundled demo\n";
  const output::OutputState state = output::inspect_output(scenario, overwrite);
  if (state == output::OutputState::up_to_date) {
    if (!quiet)
      err << fmt::format("covergrid: {} is already complete for this scenario\n", scenario.cube_path);
  } else {
    const engine::Plan plan = engine::make_plan(scenario);
    output::CubeWriter writer(scenario, plan, state == output::OutputState::resumed);
    if (state == output::OutputState::resumed && !quiet)
      err << fmt::format("covergrid: resuming the unfinished run in {}\n",
                         output::journal_path(scenario.cube_path));
    Progress progress(err, quiet, isatty(STDERR_FILENO) != 0);
    {
      const auto done = writer.completed();
      for (const auto& c : plan.chunks)
        if (done[c.id]) progress.resumed_ += c.n_count * c.p_count;
    }
    engine::RunOptions options;
    options.threads = threads;
    options.stop = &stop_requested;
    options.progress = [&](std::size_t d, std::size_t t) { progress.update(d, t); };
    stop_requested = false;
    auto old_int = std::signal(SIGINT, on_stop_signal);
    auto old_term = std::signal(SIGTERM, on_stop_signal);
    engine::RunReport report;
    try {
      report = engine::run_scenario(scenario, writer, options);
    } catch (...) {
      std::signal(SIGINT, old_int);
      std::signal(SIGTERM, old_term);
      throw;
    }
    std::signal(SIGINT, old_int);
    std::signal(SIGTERM, old_term);
    progress.done();
    if (report.interrupted) {
      err << fmt::format(
          "covergrid: stopped; {} of {} chunks are saved in {}; run the same command to resume\n",
          report.chunks_resumed + report.chunks_computed, report.chunks_total,
          output::journal_path(scenario.cube_path));
      return exit_internal;
    }
  }
  output::CubeReader cube(scenario.cube_path);
  out << fmt::format("{}\ncube: {}\n", scenario.title.empty() ? scenario.source_name : scenario.title,
                     scenario.cube_path);
  if (!scenario.tables_prefix.empty())
    for (const auto& p : output::write_tables(cube, scenario.tables_prefix)) out << "table: " << p << '\n';
  out << output::headline(cube);
  return exit_ok;
}

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

int cmd_methods(std::ostream& out) {
  for (const auto& e : methods::registry()) {
    out << fmt::format("{}\n  {} — {}\n  {}\n  reference: {}\n", e.info.id, e.info.name,
                       methods::family_name(e.info.family), e.info.definition, e.info.reference);
    for (const auto& p : e.info.params) {
      std::string choices;
      for (const auto& c : p.choices) choices += (choices.empty() ? " (" : ", ") + c;
      if (!choices.empty()) choices += ")";
      out << fmt::format("  parameter {} = {}{}: {}\n", p.name, methods::param_text(p.default_value), choices,
                         p.description);
    }
    out << '\n';
  }
  return exit_ok;
}

int cmd_inspect(const std::string& path, std::ostream& out) {
  output::CubeReader cube(path);
  out << fmt::format("{}\n  format {} version {}, written by covergrid {} at {}\n", path, cube.attr("format"),
                     cube.attr("format_version"), cube.attr("tool_version"), cube.attr("created_utc"));
  out << fmt::format("  title: {}\n  scenario sha256: {}\n  seed: {}  shard: {}  complete: {}\n",
                     cube.attr("title"), cube.attr("scenario_sha256"), cube.attr("seed"), cube.attr("shard"),
                     cube.complete() ? "yes" : "no");
  out << fmt::format("  axes: model {} x side {} x level {} x method {} x n {} ({}..{}) x p {} ({}..{})\n",
                     cube.models.size(), cube.sides.size(), cube.levels.size(), cube.methods.size(),
                     cube.n.size(), cube.n.front(), cube.n.back(), cube.p.size(), cube.p.front(),
                     cube.p.back());
  out << "  methods:";
  for (const auto& m : cube.methods) out << ' ' << m;
  out << '\n';
  out << fmt::format("  sources: {}\n", cube.has_exact() && cube.has_mc() ? "exact and Monte Carlo"
                                        : cube.has_exact()                ? "exact"
                                                                          : "Monte Carlo");
  if (!cube.complete()) {
    out << "  the cube is not complete: its summaries are partial\n";
    return exit_ok;
  }
  out << output::headline(cube);
  return exit_ok;
}

/// Paired Monte Carlo differences of two methods' coverage, re-drawn from
/// the cube's own scenario and seed (the streams are counter-based, so the
/// draws are exactly the run's; the marginal coverages are checked against
/// the cube bit for bit).
int cmd_pair(const std::string& path, const std::string& pair, bool csv, std::ostream& out) {
  const auto comma = pair.find(',');
  if (comma == std::string::npos || comma == 0 || comma + 1 == pair.size())
    throw InputError("--pair", "give two method labels separated by a comma, e.g. --pair wilson,wald");
  const std::string label_a = pair.substr(0, comma), label_b = pair.substr(comma + 1);
  output::CubeReader cube(path);
  if (!cube.complete()) throw InputError(path, "is not complete");
  if (!cube.has_mc())
    throw InputError(path, "holds no Monte Carlo results (the scenario had replicates = 0)");
  const engine::Scenario s =
      scenarios::load_scenario_text(cube.attr("scenario"), path + " (its scenario)", "");
  if (s.sha256 != cube.attr("scenario_sha256"))
    throw InputError(path, "its stored scenario does not match its checksum");
  auto find = [&](const std::string& label) {
    for (std::size_t m = 0; m < s.methods.size(); ++m)
      if (s.methods[m].label == label) return m;
    std::string labels;
    for (const auto& m : s.methods) labels += (labels.empty() ? "" : ", ") + m.label;
    throw InputError("--pair",
                     fmt::format("no method labelled '{}' in {} (labels: {})", label, path, labels));
  };
  const std::size_t ia = find(label_a), ib = find(label_b);
  if (csv) out << "model,side,level,n,p,replicates,coverage_a,coverage_b,difference,difference_se\n";
  for (std::size_t model = 0; model < s.models.size(); ++model)
    for (std::size_t side = 0; side < s.sides.size(); ++side) {
      if (!s.methods[ia].method->supports(s.sides[side]) || !s.methods[ib].method->supports(s.sides[side]))
        continue;
      for (std::size_t level = 0; level < s.levels.size(); ++level) {
        if (!csv)
          out << fmt::format(
              "\n{} model, {}, nominal {:g}%: coverage of {} minus {} (paired, same draws)\n"
              "  {:>6}  {:>10}  {:>10}  {:>10}  {:>12}\n",
              s.models[model].label, methods::side_name(s.sides[side]), 100 * s.levels[level], label_a,
              label_b, "n", "mean diff", "min diff", "max diff", "max |diff|/se");
        for (std::size_t ni = 0; ni < s.n.size(); ++ni) {
          const int n = s.n[ni];
          const auto ta = engine::build_table(*s.methods[ia].method, n, s.levels[level], s.sides[side]);
          const auto tb = engine::build_table(*s.methods[ib].method, n, s.levels[level], s.sides[side]);
          const auto reps = cube.mc_replicates(model, ni);
          const auto stored_a = cube.mc_row("coverage", model, side, level, ia, ni);
          double sum = 0, lo = HUGE_VAL, hi = -HUGE_VAL, zmax = 0;
          for (std::size_t pi = 0; pi < s.p.size(); ++pi) {
            const auto c = engine::paired_difference(s.seed, model, n, pi, s.p[pi],
                                                     static_cast<std::uint64_t>(reps[pi]), ta, tb);
            if (c.coverage_a != stored_a[pi])
              throw std::runtime_error(
                  fmt::format("re-drawn coverage differs from the cube at n = {}, p = {}", n, s.p[pi]));
            if (csv)
              out << fmt::format("{},{},{},{},{},{},{:.17g},{:.17g},{:.17g},{:.17g}\n", s.models[model].label,
                                 methods::side_name(s.sides[side]), s.levels[level], n, s.p[pi], c.replicates,
                                 c.coverage_a, c.coverage_b, c.difference, c.difference_se);
            sum += c.difference;
            lo = std::min(lo, c.difference);
            hi = std::max(hi, c.difference);
            if (c.difference_se > 0) zmax = std::max(zmax, std::fabs(c.difference) / c.difference_se);
          }
          if (!csv)
            out << fmt::format("  {:>6}  {:>+10.5f}  {:>+10.5f}  {:>+10.5f}  {:>12.1f}\n", n,
                               sum / static_cast<double>(s.p.size()), lo, hi, zmax);
        }
      }
    }
  if (!csv)
    out << "\nThe standard error of each difference comes from the discordant replicates (one method "
           "covers,\n"
           "the other does not); --csv gives every (n, p).\n";
  return exit_ok;
}

}  // namespace

int run_cli(const std::vector<std::string>& args, std::ostream& out, std::ostream& err) {
  CLI::App app{fmt::format("covergrid {} — how confidence intervals for a proportion really behave: exact\n"
                           "coverage, tail misses and width of interval methods over grids of n and p.",
                           tool_version),
               "covergrid"};
  app.require_subcommand(1);
  app.set_version_flag("--version", std::string(tool_version));
  app.footer(std::string("\n") + output::coverage_caution);

  std::string scenario_file;
  int threads = 0;
  bool quiet = false, overwrite = false;
  auto* run =
      app.add_subcommand("run", "Evaluate every method on a scenario's grid; write the cube and tables");
  run->add_option("SCENARIO", scenario_file, "scenario file (TOML); without it, the bundled demo");
  run->add_option("--threads", threads, "worker threads (default: all cores)")
      ->check(CLI::Validator(
          [](std::string& v) {
            char* end = nullptr;
            const long k = std::strtol(v.c_str(), &end, 10);
            return (end && *end == '\0' && !v.empty() && k >= 1 && k <= 4096)
                       ? std::string()
                       : std::string("must be an integer from 1 to 4096");
          },
          "INT>=1"));
  run->add_flag("--quiet", quiet, "no progress display");
  run->add_flag("--overwrite", overwrite, "replace an existing cube or unfinished run of another scenario");

  int x = 0, n = 0;
  double level = 0.95;
  std::string side = "two-sided";
  std::vector<std::string> method_texts;
  bool csv = false;
  auto* intervals =
      app.add_subcommand("intervals", "Every method's limits for observed data X successes in N trials");
  intervals->add_option("X", x, "observed successes")->required();
  intervals->add_option("N", n, "trials")->required();
  intervals->add_option("--level", level, "confidence level in (0, 1) (default 0.95)");
  intervals->add_option("--side", side, "two-sided, lower-bound or upper-bound (default two-sided)");
  intervals->add_option("--method", method_texts,
                        "method id, optionally id:key=value,... (repeatable; default all)");
  intervals->add_flag("--csv", csv, "CSV output with raw (unclipped) limits");

  app.add_subcommand("methods", "The catalog of interval methods: ids, parameters, references");

  std::string cube_path;
  auto* inspect = app.add_subcommand("inspect", "What a cube holds and its headline figures");
  inspect->add_option("CUBE", cube_path, "cube file (.h5)")->required();
  std::string pair;
  bool pair_csv = false;
  inspect->add_option("--pair", pair, "A,B: paired Monte Carlo differences of two methods' coverage");
  inspect->add_flag("--csv", pair_csv, "with --pair: one CSV row per (model, side, level, n, p)");

  if (!args.empty() && !args[0].empty() && args[0][0] != '-') {
    std::string names;
    bool known = false;
    for (const CLI::App* sub : app.get_subcommands([](CLI::App*) { return true; })) {
      known |= sub->get_name() == args[0];
      names += (names.empty() ? "" : ", ") + sub->get_name();
    }
    if (!known) {
      err << fmt::format("covergrid: unknown command '{}' (commands: {})\n(see covergrid --help)\n", args[0],
                         names);
      return exit_bad_input;
    }
  }
  try {
    std::vector<std::string> reversed(args.rbegin(), args.rend());
    app.parse(reversed);
  } catch (const CLI::CallForHelp&) {
    out << app.help();
    return exit_ok;
  } catch (const CLI::CallForAllHelp&) {
    out << app.help("", CLI::AppFormatMode::All);
    return exit_ok;
  } catch (const CLI::CallForVersion&) {
    out << tool_version << '\n';
    return exit_ok;
  } catch (const CLI::ParseError& e) {
    err << "covergrid: " << e.what() << "\n(see covergrid --help)\n";
    return exit_bad_input;
  }

  try {
    if (run->parsed()) return cmd_run(scenario_file, threads, quiet, overwrite, out, err);
    if (intervals->parsed()) return cmd_intervals(x, n, level, side, method_texts, csv, out);
    if (app.got_subcommand("methods")) return cmd_methods(out);
    if (inspect->parsed())
      return pair.empty() ? cmd_inspect(cube_path, out) : cmd_pair(cube_path, pair, pair_csv, out);
  } catch (const InputError& e) {
    err << "covergrid: " << e.what() << '\n';
    return exit_bad_input;
  } catch (const std::exception& e) {
    err << "covergrid: internal error: " << e.what() << '\n';
    return exit_internal;
  }
  return exit_internal;
}

}  // namespace covergrid::cli
