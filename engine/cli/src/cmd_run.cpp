// covergrid run: evaluate a scenario into its cube (resumable), with progress
// on stderr and a clean stop on SIGINT/SIGTERM.
#include "commands.hpp"
#include "progress.hpp"
#include "covergrid/engine/estimate.hpp"
#include "covergrid/engine/run.hpp"
#include "covergrid/engine/shard.hpp"
#include "covergrid/output/cube.hpp"
#include "covergrid/output/tables.hpp"
#include "covergrid/scenarios/loader.hpp"

#include <fmt/format.h>
#include <unistd.h>

#ifdef COVERGRID_MPI
#include "mpi_run.hpp"
#endif

#include <algorithm>
#include <atomic>
#include <chrono>
#include <csignal>
#include <memory>
#include <optional>

namespace covergrid::cli {

namespace {

std::atomic<bool> stop_requested{false};
extern "C" void on_stop_signal(int) { stop_requested.store(true); }

/// Syncs the journal of a run that stops unfinished, so that it survives a
/// crash of the machine as well as the process's end. The run's own failure
/// is what gets reported: a sync that fails as well (a full disk) adds
/// nothing a user could act on, and what write() handed the kernel stays.
void sync_for_resume(output::CubeWriter& writer) {
  try {
    writer.sync();
  } catch (const std::exception&) {
    // The records themselves are written; only their durability is unsure.
  }
}

struct RunArgs {
  std::string scenario_file;
  int threads = 0;
  bool quiet = false, overwrite = false, dry_run = false, yes = false;
  std::string shard;  // "K/N" or empty
};

/// The estimate in one line: cells, time, data sizes.
std::string estimate_text(const engine::RunEstimate& e) {
  return fmt::format(
      "{} cells to compute, {} on {} thread{} (rough; from timing {} sample chunk{} on one thread); "
      "cube data {} uncompressed (the file is about as large: the metrics are stored uncompressed), journal "
      "up to {} while running",
      e.cells, engine::duration_words(e.seconds), e.threads, e.threads == 1 ? "" : "s", e.chunks_timed,
      e.chunks_timed == 1 ? "" : "s", engine::size_words(e.cube_bytes), engine::size_words(e.journal_bytes));
}

/// The chunks this invocation computes: the shard's, or all.
std::vector<std::size_t> chunks_of(const engine::Plan& plan, const engine::ShardSelection* shard) {
  if (shard) return shard->chunks;
  std::vector<std::size_t> ids(plan.chunks.size());
  for (std::size_t i = 0; i < ids.size(); ++i) ids[i] = i;
  return ids;
}

/// Refuses a large run (engine::RunEstimate::large) without --yes.
void check_large(const engine::RunEstimate& e, bool yes) {
  if (!e.large() || yes) return;
  throw InputError(
      "--yes",
      fmt::format("this run is large: {} and a {} cube (the limits without --yes: {} of wall time, {} of "
                  "cube data); check the grid, then run again with --yes to start it (or split it with "
                  "--shard K/N)",
                  engine::duration_words(e.seconds), engine::size_words(e.cube_bytes),
                  engine::duration_words(engine::large_run_seconds),
                  engine::size_words(engine::large_run_bytes)));
}

/// --dry-run: the plan, and the shard's part of it, without computing.
int print_plan(const engine::Scenario& scenario, const engine::Plan& plan,
               const engine::ShardSelection* shard, int threads, std::ostream& out) {
  std::size_t cells = 0;
  double total = 0, part = 0;
  for (const auto& c : plan.chunks) {
    cells += c.n_count * c.p_count;
    total += engine::chunk_cost(scenario, c);
  }
  out << fmt::format("{}\n  cells: {} (model {} x n {} x p {}), each for {} side/level/method combinations\n",
                     scenario.title.empty() ? scenario.source_name : scenario.title, cells,
                     scenario.models.size(), scenario.n.size(), scenario.p.size(),
                     engine::combo_count(scenario));
  out << fmt::format("  chunks: {} of {} n x {} p (so --shard K/N takes N from 1 to {})\n",
                     plan.chunks.size(), plan.n_block, plan.p_block, plan.chunks.size());
  if (shard) {
    std::size_t shard_cells = 0;
    for (std::size_t id : shard->chunks) {
      shard_cells += plan.chunks[id].n_count * plan.chunks[id].p_count;
      part += engine::chunk_cost(scenario, plan.chunks[id]);
    }
    out << fmt::format("  shard {}: chunks {}..{} ({} chunks, {} cells, {:.1f}% of the estimated cost)\n",
                       shard->spec.label(), shard->chunks.front(), shard->chunks.back(), shard->chunks.size(),
                       shard_cells, 100 * part / total);
    out << fmt::format("  shard cube: {}\n", scenario.cube_path);
  } else {
    out << fmt::format("  cube: {}\n", scenario.cube_path);
  }
  const engine::RunEstimate e = engine::estimate_run(scenario, plan, chunks_of(plan, shard), threads);
  out << "  estimate: " << estimate_text(e) << '\n';
  if (e.large()) out << "  this is a large run: `run` will ask for --yes before it starts it\n";
  return exit_ok;
}

int run_root(const RunArgs& a, std::ostream& out, std::ostream& err) {
  const bool quiet = a.quiet;
  // The option is checked before anything is read or written.
  std::optional<engine::ShardSpec> spec;
  if (!a.shard.empty()) spec = engine::parse_shard(a.shard);
  engine::Scenario scenario =
      a.scenario_file.empty()
          ? scenarios::load_scenario_text(scenarios::bundled_demo_text(), "<bundled demo>", "")
          : scenarios::load_scenario_file(a.scenario_file);
  if (a.scenario_file.empty() && !quiet) err << "covergrid: no scenario given; running the bundled demo\n";
  const engine::Plan plan = engine::make_plan(scenario);
  std::optional<engine::ShardSelection> shard;
  if (spec) {
    shard = engine::ShardSelection{*spec, engine::shard_chunks(scenario, plan, *spec)};
    scenario.cube_path = engine::shard_cube_path(scenario.cube_path, *spec);
  }
  if (a.dry_run) return print_plan(scenario, plan, shard ? &*shard : nullptr, a.threads, out);
  const output::OutputState state =
      output::inspect_output(scenario, a.overwrite, shard ? shard->spec.label() : "all");
  if (state == output::OutputState::up_to_date) {
    if (!quiet)
      err << fmt::format("covergrid: {} is already complete for this scenario\n", scenario.cube_path);
  } else {
    // A fresh run is estimated, and refused if large without --yes, before
    // anything is created; a resumed one (already accepted) is estimated on
    // what is left.
    const std::vector<std::size_t> mine = chunks_of(plan, shard ? &*shard : nullptr);
    std::optional<engine::RunEstimate> estimate;
    if (state != output::OutputState::resumed) {
      estimate = engine::estimate_run(scenario, plan, mine, a.threads);
      check_large(*estimate, a.yes);
    }
    output::CubeWriter writer(scenario, plan, state == output::OutputState::resumed,
                              shard ? &*shard : nullptr);
    if (!estimate) {
      const auto done = writer.completed();
      std::vector<std::size_t> todo;
      for (std::size_t id : mine)
        if (!done[id]) todo.push_back(id);
      estimate = engine::estimate_run(scenario, plan, todo, a.threads);
    }
    if (!quiet) err << "covergrid: " << estimate_text(*estimate) << '\n';
    if (state == output::OutputState::resumed && !quiet)
      err << fmt::format("covergrid: resuming the unfinished run in {}\n",
                         output::journal_path(scenario.cube_path));
    // Damage in the journal is said even with --quiet: chunks are recomputed.
    if (!writer.resume_note().empty()) err << "covergrid: " << writer.resume_note() << '\n';
    Progress progress(err, quiet, isatty(STDERR_FILENO) != 0);
    {
      const auto done = writer.completed();
      for (const auto& c : plan.chunks)
        if (done[c.id] && (!shard || std::binary_search(shard->chunks.begin(), shard->chunks.end(), c.id)))
          progress.resumed += c.n_count * c.p_count;
    }
    engine::RunOptions options;
    options.threads = a.threads;
    if (shard) options.only_chunks = &shard->chunks;
    options.stop = &stop_requested;
    options.progress = [&](std::size_t d, std::size_t t) { progress.update(d, t); };
    stop_requested = false;
    auto old_int = std::signal(SIGINT, on_stop_signal);
    auto old_term = std::signal(SIGTERM, on_stop_signal);
    writer.set_stop(&stop_requested);
    engine::RunReport report;
    try {
#ifdef COVERGRID_MPI
      if (mpi::active())
        report = mpi::run_ranks(scenario, plan, writer, options);
      else
#endif
        report = engine::run_scenario(scenario, writer, options);
    } catch (const output::Interrupted&) {
      // Every chunk is in the journal; only the assembly was cut short.
      std::signal(SIGINT, old_int);
      std::signal(SIGTERM, old_term);
      progress.done();
      sync_for_resume(writer);
      err << fmt::format(
          "covergrid: stopped while the cube was being assembled; all {} chunks are saved in {}; run the "
          "same command to resume (it assembles the cube)\n",
          shard ? shard->chunks.size() : plan.chunks.size(), output::journal_path(scenario.cube_path));
      return exit_internal;
    } catch (...) {
      std::signal(SIGINT, old_int);
      std::signal(SIGTERM, old_term);
      // A run that fails before its first chunk leaves nothing behind.
      writer.discard_if_empty();
      throw;
    }
    std::signal(SIGINT, old_int);
    std::signal(SIGTERM, old_term);
    progress.done();
    if (!quiet && report.chunks_by_rank.size() > 1) {
      std::string counts;
      for (std::size_t r = 0; r < report.chunks_by_rank.size(); ++r)
        counts += fmt::format("{}rank {}: {}", r ? ", " : "", r, report.chunks_by_rank[r]);
      err << fmt::format("covergrid: {} ranks computed {} chunks ({})\n", report.chunks_by_rank.size(),
                         report.chunks_computed, counts);
    }
    if ((!report.failure.empty() || report.interrupted) && writer.discard_if_empty()) {
      err << fmt::format("covergrid: {}; the run stopped before its first chunk and left nothing behind\n",
                         report.failure.empty() ? "stopped" : report.failure);
      return exit_internal;
    }
    // A run that stops unfinished syncs its journal now (it is otherwise
    // synced at most every few seconds while running).
    if (!report.failure.empty() || report.interrupted) sync_for_resume(writer);
    if (!report.failure.empty()) {
      err << fmt::format(
          "covergrid: {}; the run stopped; {} of {} chunks are saved in {}; run the same command (with or "
          "without mpirun) to resume\n",
          report.failure, report.chunks_resumed + report.chunks_computed, report.chunks_total,
          output::journal_path(scenario.cube_path));
      return exit_internal;
    }
    if (report.interrupted) {
      err << fmt::format(
          "covergrid: stopped; {} of {} chunks are saved in {}; run the same command to resume\n",
          report.chunks_resumed + report.chunks_computed, report.chunks_total,
          output::journal_path(scenario.cube_path));
      return exit_internal;
    }
  }
  const std::string title = scenario.title.empty() ? scenario.source_name : scenario.title;
  if (shard) {
    out << fmt::format("{}\nshard {}: chunks {}..{} of {}\ncube: {}\n", title, shard->spec.label(),
                       shard->chunks.front(), shard->chunks.back(), plan.chunks.size(), scenario.cube_path);
    out << fmt::format("when all {} shards are done: covergrid merge SHARD-CUBES... -o CUBE.h5\n",
                       shard->spec.count);
    return exit_ok;
  }
  output::CubeReader cube(scenario.cube_path);
  out << fmt::format("{}\ncube: {}\n", title, scenario.cube_path);
  if (!scenario.tables_prefix.empty())
    for (const auto& p : output::write_tables(cube, scenario.tables_prefix)) out << "table: " << p << '\n';
  out << output::headline(cube);
  return exit_ok;
}

int cmd_run(const RunArgs& a, std::ostream& out, std::ostream& err) {
#ifdef COVERGRID_MPI
  // Under mpirun: rank 0 does what a single process does and deals the
  // chunks; the others wait for them. Rank 0 always tells the others when
  // there is nothing to deal (done, dry run, or an error).
  if (mpi::active()) {
    if (mpi::rank() > 0) return mpi::serve(a.threads);
    int status = exit_internal;
    try {
      status = run_root(a, out, err);
    } catch (const InputError&) {
      mpi::release_ranks(exit_bad_input);
      throw;
    } catch (...) {
      mpi::release_ranks(exit_internal);
      throw;
    }
    mpi::release_ranks(status);
    return status;
  }
#endif
  return run_root(a, out, err);
}

}  // namespace

Command add_run_command(CLI::App& app) {
  auto a = std::make_shared<RunArgs>();
  auto* run =
      app.add_subcommand("run", "Evaluate every method on a scenario's grid; write the cube and tables");
  run->add_option("SCENARIO", a->scenario_file, "scenario file (TOML); without it, the bundled demo");
  run->add_option("--threads", a->threads, "worker threads (default: all cores)")
      ->check(integer_in(1, 4096))
      ->type_name("1..4096");
  run->add_flag("--quiet", a->quiet, "no progress display");
  run->add_flag("--overwrite", a->overwrite,
                "replace an existing cube or unfinished run of another scenario");
  run->add_option(
      "--shard", a->shard,
      "compute only shard K of N (K/N, 1 <= K <= N <= chunks) into NAME.shard-K-of-N.h5 beside the "
      "cube; join the shards with covergrid merge");
  run->add_flag("--dry-run", a->dry_run,
                "print the plan (cells, chunks, the shard's part) and its estimated time and cube size; "
                "compute nothing");
  run->add_flag("--yes", a->yes,
                "start a large run (estimated over 2 hours of wall time or 20 GB of cube data), which "
                "is refused without it");
  return {run, [a](std::ostream& out, std::ostream& err) { return cmd_run(*a, out, err); }};
}

}  // namespace covergrid::cli
