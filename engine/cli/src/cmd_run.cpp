// covergrid run: evaluate a scenario into its cube (resumable), with progress
// on stderr and a clean stop on SIGINT/SIGTERM.
#include "commands.hpp"
#include "covergrid/engine/run.hpp"
#include "covergrid/output/cube.hpp"
#include "covergrid/output/tables.hpp"
#include "covergrid/scenarios/loader.hpp"

#include <fmt/format.h>
#include <unistd.h>

#include <atomic>
#include <chrono>
#include <csignal>
#include <memory>

namespace covergrid::cli {

namespace {

std::atomic<bool> stop_requested{false};
extern "C" void on_stop_signal(int) { stop_requested.store(true); }

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

struct RunArgs {
  std::string scenario_file;
  int threads = 0;
  bool quiet = false, overwrite = false;
};

}  // namespace

Command add_run_command(CLI::App& app) {
  auto a = std::make_shared<RunArgs>();
  auto* run =
      app.add_subcommand("run", "Evaluate every method on a scenario's grid; write the cube and tables");
  run->add_option("SCENARIO", a->scenario_file, "scenario file (TOML); without it, the bundled demo");
  run->add_option("--threads", a->threads, "worker threads (default: all cores)")->check(integer_in(1, 4096));
  run->add_flag("--quiet", a->quiet, "no progress display");
  run->add_flag("--overwrite", a->overwrite,
                "replace an existing cube or unfinished run of another scenario");
  return {run, [a](std::ostream& out, std::ostream& err) {
            return cmd_run(a->scenario_file, a->threads, a->quiet, a->overwrite, out, err);
          }};
}

}  // namespace covergrid::cli
