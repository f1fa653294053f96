#include "covergrid/engine/run.hpp"

#include "covergrid/engine/binomial_window.hpp"
#include "covergrid/engine/exact.hpp"
#include "covergrid/engine/interval_table.hpp"
#include "covergrid/engine/monte_carlo.hpp"
#include "covergrid/engine/random.hpp"
#include "pending_chunks.hpp"

#include <tbb/global_control.h>
#include <tbb/parallel_for.h>
#include <tbb/parallel_pipeline.h>
#include <tbb/task_arena.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <list>
#include <map>
#include <exception>
#include <memory>
#include <mutex>
#include <optional>
#include <stdexcept>

namespace covergrid::engine {

namespace {

constexpr double nan = std::numeric_limits<double>::quiet_NaN();

/// One row's tables, one per combo (side-major, then level, then method).
using RowTables = std::vector<IntervalTable>;

struct Combo {
  Side side;
  double level;
  const methods::IntervalMethod* method;
  const std::string* label;  // the method's label, for error messages
};

std::vector<Combo> combos_of(const Scenario& s) {
  std::vector<Combo> out;
  out.reserve(combo_count(s));
  for (Side side : s.sides)
    for (double level : s.levels)
      for (const auto& m : s.methods) out.push_back({side, level, m.method.get(), &m.label});
  return out;
}

/// The combo's table at n under `model`: design-aware methods (finite
/// population corrections) are bound to the model's design first.
IntervalTable table_for(const Combo& c, int n, const SamplingModel& model) {
  return build_table(*c.method, n, c.level, c.side, *c.label, model.design());
}

/// Every combo's table at n, in parallel. Isolated, so that the waiting
/// thread never picks up another chunk (which might wait on the same row's
/// once_flag) while it waits for the loop.
RowTables build_row(const std::vector<Combo>& combos, int n, const SamplingModel& model) {
  RowTables tables(combos.size());
  tbb::this_task_arena::isolate([&] {
    tbb::parallel_for(std::size_t{0}, combos.size(),
                      [&](std::size_t c) { tables[c] = table_for(combos[c], n, model); });
  });
  return tables;
}

/// Fills a chunk's results from prebuilt tables (tables[i] for row n_begin + i).
ChunkResult compute_with_tables(const Scenario& scenario, const ChunkSpec& chunk,
                                const std::vector<const RowTables*>& tables) {
  const std::size_t combos = combo_count(scenario);
  ChunkResult r;
  r.spec = chunk;
  r.combos = combos;
  const std::size_t cells = chunk.n_count * chunk.p_count;
  // Poisoned until written (check_written verifies).
  r.has_exact = scenario.exact;
  if (r.has_exact)
    for (auto& v : r.exact) v.assign(combos * cells, nan);
  r.has_mc = scenario.replicates > 0;
  if (r.has_mc) {
    for (auto& v : r.mc) v.assign(combos * cells, nan);
    r.mc_replicates.assign(cells, nan);
  }
  const ReplicateRule rule{scenario.replicates, scenario.target_se, scenario.max_replicates};
  const SamplingModel& model = *scenario.models[chunk.model].model;
  ProbabilityWindow window;  // one window per cell serves both sources
  CellDraws draws;
  std::vector<const IntervalTable*> row_tables(combos);
  std::vector<RunCursor> cursors(combos);
  std::vector<CellMetrics> cell(combos);
  for (std::size_t i = 0; i < chunk.n_count; ++i) {
    const int n = scenario.n[chunk.n_begin + i];
    for (std::size_t c = 0; c < combos; ++c) row_tables[c] = &(*tables[i])[c];
    std::fill(cursors.begin(), cursors.end(), RunCursor{});
    for (std::size_t j = 0; j < chunk.p_count; ++j) {
      const std::size_t p_index = chunk.p_begin + j;
      // The p the model attains (a finite population's K/N); the grid's own p otherwise.
      const double p = model.attainable(scenario.p[p_index]);
      model.window(n, p, window);
      if (r.has_exact) {
        exact_metrics_cell(row_tables.data(), combos, window, p, cursors.data(), cell.data());
        for (std::size_t c = 0; c < combos; ++c) {
          const std::size_t at = c * cells + i * chunk.p_count + j;
          for (std::size_t k = 0; k < metric_count; ++k) r.exact[k][at] = cell[c][k];
        }
      }
      if (r.has_mc) {
        const CellStream stream(scenario.seed, static_cast<std::uint32_t>(chunk.model),
                                static_cast<std::uint32_t>(n), static_cast<std::uint32_t>(p_index));
        const auto clusters = cluster_sampler_for(model, n, p, row_tables);
        simulate_cell(window, stream, rule, row_tables, p, draws, clusters.get());
        r.mc_replicates[i * chunk.p_count + j] = static_cast<double>(draws.replicates);
        for (std::size_t c = 0; c < combos; ++c) {
          const McMetrics m = mc_metrics(*row_tables[c], window, draws, p);
          const std::size_t at = c * cells + i * chunk.p_count + j;
          for (std::size_t k = 0; k < mc_metric_count; ++k) r.mc[k][at] = m[k];
        }
      }
    }
  }
  // The grid's p as the model attains them (the grid itself for models that
  // attain every p).
  std::vector<double> snapped;
  if (model.lattice() > 0)
    for (double p : scenario.p) snapped.push_back(model.attainable(p));
  const std::vector<double>& attained_p = model.lattice() > 0 ? snapped : scenario.p;
  if (chunk.p_begin == 0 && chunk.p_count == scenario.p.size()) {
    const std::size_t methods = scenario.methods.size(), levels = scenario.levels.size();
    auto fill = [&](const std::array<std::vector<double>, metric_count>* ex,
                    const std::array<std::vector<double>, mc_metric_count>* mc,
                    std::array<std::vector<double>, grid_stat_count>& out) {
      for (auto& v : out) v.assign(combos * chunk.n_count, nan);
      double row[grid_stat_count];
      for (std::size_t c = 0; c < combos; ++c)
        for (std::size_t i = 0; i < chunk.n_count; ++i) {
          const std::size_t at = c * cells + i * chunk.p_count;
          const auto& cov = ex ? (*ex)[index(Metric::coverage)] : (*mc)[index(Metric::coverage)];
          const auto& wid = ex ? (*ex)[index(Metric::width)] : (*mc)[index(Metric::width)];
          const auto& mlo = ex ? (*ex)[index(Metric::miss_low)] : (*mc)[index(Metric::miss_low)];
          const auto& mhi = ex ? (*ex)[index(Metric::miss_high)] : (*mc)[index(Metric::miss_high)];
          grid_stats(&cov[at], &wid[at], &mlo[at], &mhi[at], attained_p,
                     scenario.levels[(c / methods) % levels], row);
          for (std::size_t k = 0; k < grid_stat_count; ++k) out[k][c * chunk.n_count + i] = row[k];
        }
    };
    if (r.has_exact) {
      r.has_grid_stats = true;
      fill(&r.exact, nullptr, r.grid_stats);
    }
    if (r.has_mc) {
      r.has_mc_grid_stats = true;
      fill(nullptr, &r.mc, r.mc_grid_stats);
    }
  }
  if (scenario.exact && chunk.p_begin == 0) {
    r.has_row_stats = true;
    for (auto& v : r.row_stats) v.assign(combos * chunk.n_count, nan);
    for (std::size_t c = 0; c < combos; ++c)
      for (std::size_t i = 0; i < chunk.n_count; ++i) {
        const double p_lo = model.attainable(scenario.p.front()), p_hi = model.attainable(scenario.p.back());
        const IntervalTable& t = (*tables[i])[c];
        const std::size_t at = c * chunk.n_count + i;
        const InfimumResult inf = coverage_infimum(t, p_lo, p_hi, -HUGE_VAL, model);
        r.row_stats[index(Stat::inf_coverage) - grid_stat_count][at] = inf.value;
        r.row_stats[index(Stat::inf_coverage_p) - grid_stat_count][at] = inf.where;
        r.row_stats[index(Stat::inf_coverage_from) - grid_stat_count][at] = t.supported ? inf.from : nan;
        r.row_stats[index(Stat::inf_refined) - grid_stat_count][at] =
            t.supported ? (inf.refined ? 1.0 : 0.0) : nan;
        r.row_stats[index(Stat::mean_coverage_continuous) - grid_stat_count][at] =
            coverage_uniform_mean(t, p_lo, p_hi, model);
      }
  }
  return r;
}

/// Verifies that nothing poisoned remains where a value was due.
void check_written(const ChunkResult& r, const Scenario& scenario) {
  if (r.has_mc)
    for (double v : r.mc_replicates)
      if (std::isnan(v))
        throw std::logic_error("internal: a simulated cell was left unset in chunk " +
                               std::to_string(r.spec.id));
  if (!r.has_exact) return;
  const std::size_t cells = r.spec.n_count * r.spec.p_count;
  const std::size_t methods = scenario.methods.size(), levels = scenario.levels.size();
  for (std::size_t c = 0; c < r.combos; ++c) {
    const Side side = scenario.sides[c / (levels * methods)];
    const auto& method = scenario.methods[c % methods].method;
    if (!method->supports(side)) continue;  // NaN by design
    // NaN by design too: a method that needs the cluster counts (Monte Carlo only).
    if (methods::under_design(method, scenario.models[r.spec.model].model->design())->needs_clusters())
      continue;
    for (std::size_t k = 0; k < cells; ++k)
      if (std::isnan(r.exact[index(Metric::coverage)][c * cells + k]))
        throw std::logic_error("internal: a computed cell was left unset in chunk " +
                               std::to_string(r.spec.id));
  }
}

}  // namespace

ChunkResult compute_chunk(const Scenario& scenario, const ChunkSpec& chunk) {
  const auto combos = combos_of(scenario);
  std::vector<RowTables> rows(chunk.n_count);
  std::vector<const RowTables*> ptrs;
  for (std::size_t i = 0; i < chunk.n_count; ++i) {
    for (const auto& c : combos)
      rows[i].push_back(table_for(c, scenario.n[chunk.n_begin + i], *scenario.models[chunk.model].model));
    ptrs.push_back(&rows[i]);
  }
  return compute_with_tables(scenario, chunk, ptrs);
}

void GridAccumulator::add(double coverage, double width, double miss_low, double miss_high, double p,
                          double nominal) {
  if (std::isnan(coverage)) undefined_ = true;
  sum_ += coverage;
  sq_ += (coverage - nominal) * (coverage - nominal);
  below_ += coverage < nominal ? 1.0 : 0.0;
  width_ += width;
  low_ += miss_low;
  high_ += miss_high;
  if (coverage < min_) {
    min_ = coverage;
    min_p_ = p;
  }
  ++count_;
}

void GridAccumulator::finish(double, double* stats) const {
  if (undefined_ || count_ == 0) {
    for (std::size_t s = 0; s < grid_stat_count; ++s) stats[s] = nan;
    return;
  }
  const double k = static_cast<double>(count_);
  stats[index(Stat::mean_coverage)] = sum_ / k;
  stats[index(Stat::min_coverage)] = min_;
  stats[index(Stat::min_coverage_p)] = min_p_;
  stats[index(Stat::rms_deviation)] = std::sqrt(sq_ / k);
  stats[index(Stat::share_below)] = below_ / k;
  stats[index(Stat::mean_width)] = width_ / k;
  stats[index(Stat::mean_miss_low)] = low_ / k;
  stats[index(Stat::mean_miss_high)] = high_ / k;
}

void grid_stats(const double* coverage, const double* width, const double* miss_low, const double* miss_high,
                const std::vector<double>& p, double nominal, double* stats) {
  GridAccumulator acc;
  for (std::size_t j = 0; j < p.size(); ++j)
    acc.add(coverage[j], width[j], miss_low[j], miss_high[j], p[j], nominal);
  acc.finish(nominal, stats);
}

namespace {

/// Grid statistics for rows split over several chunks, read back block by
/// block of p so that memory stays bounded by one chunk's worth per metric.
void summarise(const Scenario& scenario, const Plan& plan, ResultSink& sink, Source source) {
  const std::size_t combos = combo_count(scenario);
  const std::size_t points = scenario.p.size();
  const std::size_t methods = scenario.methods.size(), levels = scenario.levels.size();
  std::vector<double> cov, wid, mlo, mhi, stats;
  std::vector<GridAccumulator> acc;
  for (std::size_t model = 0; model < scenario.models.size(); ++model)
    for (std::size_t nb = 0; nb < scenario.n.size(); nb += plan.n_block) {
      const SamplingModel& sampling = *scenario.models[model].model;
      const std::size_t count = std::min(plan.n_block, scenario.n.size() - nb);
      acc.assign(combos * count, GridAccumulator{});
      for (std::size_t pb = 0; pb < points; pb += plan.p_block) {
        const std::size_t width = std::min(plan.p_block, points - pb);
        sink.read_rows(source, index(Metric::coverage), model, nb, count, pb, width, cov);
        sink.read_rows(source, index(Metric::width), model, nb, count, pb, width, wid);
        sink.read_rows(source, index(Metric::miss_low), model, nb, count, pb, width, mlo);
        sink.read_rows(source, index(Metric::miss_high), model, nb, count, pb, width, mhi);
        for (std::size_t c = 0; c < combos; ++c) {
          const double nominal = scenario.levels[(c / methods) % levels];
          for (std::size_t i = 0; i < count; ++i)
            for (std::size_t j = 0; j < width; ++j) {
              const std::size_t at = (c * count + i) * width + j;
              acc[c * count + i].add(cov[at], wid[at], mlo[at], mhi[at],
                                     sampling.attainable(scenario.p[pb + j]), nominal);
            }
        }
      }
      stats.assign(grid_stat_count * combos * count, nan);
      double row[grid_stat_count];
      for (std::size_t c = 0; c < combos; ++c)
        for (std::size_t i = 0; i < count; ++i) {
          acc[c * count + i].finish(scenario.levels[(c / methods) % levels], row);
          for (std::size_t s = 0; s < grid_stat_count; ++s) stats[(s * combos + c) * count + i] = row[s];
        }
      sink.write_grid_stats(source, model, nb, count, stats);
    }
}

}  // namespace

namespace {

/// Interval tables per (model, n index), built once by the first chunk that
/// needs them (under the model's design), shared while in use, then kept for
/// the `keep` most recently released rows (the next chunks often continue a
/// row). A row evicted and needed again is rebuilt: the same tables, so only
/// time is lost.
class RowCache {
 public:
  RowCache(const Scenario& s, const std::vector<Combo>& combos, std::size_t keep)
      : scenario_(s), combos_(combos), keep_(keep) {}

  const RowTables* acquire(std::size_t model, std::size_t n_index) {
    std::shared_ptr<Entry> entry;
    {
      std::lock_guard lock(mutex_);
      auto& slot = entries_[{model, n_index}];
      if (!slot) slot = std::make_shared<Entry>();
      if (slot->users++ == 0) idle_.remove({model, n_index});
      entry = slot;
    }
    std::call_once(entry->once, [&] {
      entry->tables = build_row(combos_, scenario_.n[n_index], *scenario_.models[model].model);
    });
    return &entry->tables;
  }

  void release(std::size_t model, std::size_t n_index) {
    std::lock_guard lock(mutex_);
    auto& entry = entries_.at({model, n_index});
    if (--entry->users > 0) return;
    idle_.push_back({model, n_index});
    if (idle_.size() > keep_) {
      entries_.erase(idle_.front());
      idle_.pop_front();
    }
  }

 private:
  using Key = std::pair<std::size_t, std::size_t>;
  struct Entry {
    std::once_flag once;
    RowTables tables;
    std::size_t users = 0;
  };
  const Scenario& scenario_;
  const std::vector<Combo>& combos_;
  std::size_t keep_;
  std::mutex mutex_;
  std::map<Key, std::shared_ptr<Entry>> entries_;
  std::list<Key> idle_;  // released rows, oldest first
};

}  // namespace

namespace {

/// The first exception of a pipeline's filters, kept instead of thrown: oneTBB
/// does not destroy the results in flight between filters when one throws
/// (LeakSanitizer showed them leaked on a full disk). The filters stop
/// handing out work once it is set, the chunks in flight drain normally, and
/// it is rethrown after the pipeline.
class PipelineFailure {
 public:
  void keep() {
    const std::lock_guard<std::mutex> lock(mutex_);
    if (!failure_) failure_ = std::current_exception();
  }
  bool failed() {
    const std::lock_guard<std::mutex> lock(mutex_);
    return failure_ != nullptr;
  }
  void rethrow() {
    if (failure_) std::rethrow_exception(failure_);
  }

 private:
  std::mutex mutex_;
  std::exception_ptr failure_;
};

}  // namespace

namespace {

/// The one chunk scheduler of every run: whole runs, shards (run_scenario)
/// and the ranks of an MPI run (compute_feed). A three-stage pipeline: take
/// chunk ids from `feed` one at a time; compute them in parallel, `tokens`
/// in flight (bounding memory); hand each result to `feed` one at a time --
/// in the order the ids were taken when `in_order`, else as they finish.
/// Each chunk depends only on the scenario, so the results do not depend on
/// the thread count or the order. Rows' interval tables are shared by the
/// chunks in flight and kept for a few rows after their last use (a row's
/// chunks follow one another in plan order). The first exception of the
/// feed or a chunk stops the intake; the chunks in flight drain; it is
/// rethrown.
void schedule_chunks(const Scenario& scenario, const Plan& plan, ChunkFeed& feed, int threads,
                     std::size_t tokens, bool in_order) {
  const auto combos = combos_of(scenario);
  tbb::task_arena arena(threads);
  RowCache cache(scenario, combos, plan.n_block * 2 + 2);
  using Result = std::shared_ptr<ChunkResult>;
  PipelineFailure failure;
  arena.execute([&] {
    tbb::parallel_pipeline(
        tokens, tbb::make_filter<void, std::size_t>(tbb::filter_mode::serial_in_order,
                                                    [&](tbb::flow_control& fc) -> std::size_t {
                                                      std::optional<std::size_t> id;
                                                      if (!failure.failed()) {
                                                        try {
                                                          id = feed.next();
                                                        } catch (...) {
                                                          failure.keep();
                                                        }
                                                      }
                                                      if (!id) {
                                                        fc.stop();
                                                        return 0;
                                                      }
                                                      return *id;
                                                    }) &
                    tbb::make_filter<std::size_t, Result>(
                        tbb::filter_mode::parallel,
                        [&](std::size_t id) -> Result {
                          if (failure.failed()) return nullptr;
                          try {
                            const ChunkSpec c = plan.chunks.at(id);
                            std::vector<const RowTables*> rows;
                            for (std::size_t i = 0; i < c.n_count; ++i)
                              rows.push_back(cache.acquire(c.model, c.n_begin + i));
                            auto r = std::make_shared<ChunkResult>(compute_with_tables(scenario, c, rows));
                            for (std::size_t i = 0; i < c.n_count; ++i) cache.release(c.model, c.n_begin + i);
                            return r;
                          } catch (...) {
                            failure.keep();
                            return nullptr;
                          }
                        }) &
                    tbb::make_filter<Result, void>(
                        in_order ? tbb::filter_mode::serial_in_order : tbb::filter_mode::serial_out_of_order,
                        [&](const Result& r) {
                          if (!r || failure.failed()) return;
                          try {
                            check_written(*r, scenario);
                            feed.done(std::move(*r));
                          } catch (...) {
                            failure.keep();
                          }
                        }));
  });
  failure.rethrow();
}

int thread_count(int wanted) { return wanted > 0 ? wanted : tbb::this_task_arena::max_concurrency(); }

}  // namespace

void compute_feed(const Scenario& scenario, const Plan& plan, ChunkFeed& feed, int threads_wanted) {
  const int threads = thread_count(threads_wanted);
  schedule_chunks(scenario, plan, feed, threads, static_cast<std::size_t>(threads) * 2, false);
}

namespace detail {

PendingChunks pending_chunks(const Plan& plan, const std::vector<char>& done, const RunOptions& options,
                             RunReport& report) {
  std::vector<char> selected(plan.chunks.size(), options.only_chunks ? 0 : 1);
  if (options.only_chunks)
    for (std::size_t id : *options.only_chunks) selected.at(id) = 1;
  PendingChunks out;
  for (const auto& c : plan.chunks) {
    if (!selected[c.id]) continue;
    ++report.chunks_total;
    out.cells_total += c.n_count * c.p_count;
    if (done[c.id]) {
      ++report.chunks_resumed;
      out.cells_done += c.n_count * c.p_count;
    } else {
      out.todo.push_back(c.id);
    }
  }
  return out;
}

}  // namespace detail

RunReport run_scenario(const Scenario& scenario, ResultSink& sink, const RunOptions& options) {
  const Plan plan = make_plan(scenario, options.chunk_cells);
  RunReport report;
  const std::vector<char> done = sink.completed();
  if (done.size() != plan.chunks.size())
    throw std::logic_error("internal: sink reports a different chunk count than the plan");

  // Chunk ids still to compute, in plan order (chunks are values computed
  // from their ids; the plan stores none).
  const detail::PendingChunks pending = detail::pending_chunks(plan, done, options, report);
  const std::vector<std::size_t>& todo = pending.todo;
  std::size_t cells_done = pending.cells_done;
  const std::size_t cells_total = pending.cells_total;

  const int threads = thread_count(options.threads);
  // Chunks in flight (bounds memory) and chunks between checkpoints.
  const std::size_t tokens = static_cast<std::size_t>(threads) * 4;
  const std::size_t checkpoint_every = tokens;

  /// The run's side of the scheduler: the chunks still to do, in plan order,
  /// until a stop is asked for; each result written to the sink in plan
  /// order, with a checkpoint (and progress) every `checkpoint_every`.
  class RunFeed final : public ChunkFeed {
   public:
    RunFeed(const std::vector<std::size_t>& todo, ResultSink& sink, const RunOptions& options,
            RunReport& report, std::size_t& cells_done, std::size_t cells_total, std::size_t every)
        : todo_(todo),
          sink_(sink),
          options_(options),
          report_(report),
          cells_done_(cells_done),
          cells_total_(cells_total),
          every_(every) {}
    std::optional<std::size_t> next() override {
      if (next_ < todo_.size() && options_.stop && options_.stop->load()) report_.interrupted = true;
      if (next_ >= todo_.size() || report_.interrupted) return std::nullopt;
      return todo_[next_++];
    }
    void done(ChunkResult&& r) override {
      sink_.write_chunk(r);
      cells_done_ += r.spec.n_count * r.spec.p_count;
      ++report_.chunks_computed;
      if (++since_ >= every_) checkpoint();
    }
    void checkpoint() {
      sink_.checkpoint();
      since_ = 0;
      if (options_.progress) options_.progress(cells_done_, cells_total_);
    }

   private:
    const std::vector<std::size_t>& todo_;
    ResultSink& sink_;
    const RunOptions& options_;
    RunReport& report_;
    std::size_t& cells_done_;
    std::size_t cells_total_, every_;
    std::size_t next_ = 0, since_ = 0;
  } feed(todo, sink, options, report, cells_done, cells_total, checkpoint_every);

  schedule_chunks(scenario, plan, feed, threads, tokens, true);
  feed.checkpoint();
  if (report.interrupted) return report;
  if (options.only_chunks)
    sink.finish();
  else
    finish_scenario(scenario, plan, sink);
  return report;
}

void finish_scenario(const Scenario& scenario, const Plan& plan, ResultSink& sink) {
  // Chunks that span whole rows carried their grid statistics; otherwise
  // they are computed now, reading the rows back.
  if (plan.p_block < scenario.p.size()) {
    if (scenario.exact) summarise(scenario, plan, sink, Source::exact);
    if (scenario.replicates > 0) summarise(scenario, plan, sink, Source::mc);
  }
  sink.finish();
}

}  // namespace covergrid::engine
