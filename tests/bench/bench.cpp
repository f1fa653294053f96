// covergrid-bench: performance figures as ratios measured in one run
// (scripts/bench). Never used as a test: nothing here asserts on time.
//
//   exact-scaling  per-cell cost at n = 1000 and n = 100000 (tables prebuilt)
//   threads        a 2e5-cell grid on 1 and on 2 threads (whole run, null sink)
//   prototype      method-cells/s on one thread, 5 methods, n = 5..200 x 2000 p
//   whole          the whole process (covergrid run, cube and tables) on the prototype grid,
//                  1 and 2 threads, against the numpy yardstick when ../shared/bench has it,
//                  and the split of a one-thread run into evaluate / journal / assemble / tables
//   memory         peak RSS of a full run to a cube with P and 10 P points of p
//   mc-costs       per-replicate cost against the bare sampler loop; all methods vs one
//   mc-threads     a Monte Carlo grid on 1 and 2 threads; the cost of 1e5 cells x 1e4 replicates
//   plan           sample-size searches: wall times, against brute force over every n, 2 threads vs 1
//   estimate       run's up-front time estimate against the measured wall time of the same run
//   tables [N]     every method's interval table at n = N (default 100000), one thread
#include "covergrid/engine/binomial_window.hpp"
#include "covergrid/engine/estimate.hpp"
#include "covergrid/engine/coverage_rule.hpp"
#include "covergrid/engine/exact.hpp"
#include "covergrid/engine/interval_table.hpp"
#include "covergrid/engine/monte_carlo.hpp"
#include "covergrid/engine/random.hpp"
#include "covergrid/engine/sampler.hpp"
#include "covergrid/engine/run.hpp"
#include "covergrid/engine/sample_size.hpp"
#include "covergrid/engine/shard.hpp"
#include "covergrid/methods/registry.hpp"
#include "covergrid/output/cube.hpp"
#include "covergrid/output/tables.hpp"
#include "covergrid/scenarios/loader.hpp"

#include <boost/random/binomial_distribution.hpp>
#include <boost/random/mersenne_twister.hpp>
#include <fmt/format.h>
#include <oneapi/tbb/parallel_for.h>
#include <oneapi/tbb/task_arena.h>
#include <sys/resource.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <cmath>
#include <cstdlib>
#include <algorithm>
#include <filesystem>
#include <fstream>
#include <stdexcept>
#include <string>
#include <vector>

namespace e = covergrid::engine;
namespace m = covergrid::methods;

namespace {

double now() {
  return std::chrono::duration<double>(std::chrono::steady_clock::now().time_since_epoch()).count();
}

/// Discards results; summaries are computed from zeros.
class NullSink final : public e::ResultSink {
 public:
  explicit NullSink(std::size_t chunks) : chunks_(chunks) {}
  std::vector<char> completed() override { return std::vector<char>(chunks_, 0); }
  void write_chunk(const e::ChunkResult& r) override { checksum += r.has_exact ? r.exact[0][0] : 0.0; }
  void checkpoint() override {}
  void read_rows(e::Source, std::size_t, std::size_t, std::size_t, std::size_t count, std::size_t,
                 std::size_t width, std::vector<double>& out) override {
    out.assign(combos_ * count * width, 0.0);
  }
  void write_grid_stats(e::Source, std::size_t, std::size_t, std::size_t,
                        const std::vector<double>&) override {}
  void finish() override {}
  void set_combos(std::size_t c) { combos_ = c; }
  double checksum = 0;

 private:
  std::size_t chunks_, combos_ = 0;
};

const char* five_methods = R"(
[[method]]
id = "wald"
[[method]]
id = "wilson"
[[method]]
id = "agresti-coull"
[[method]]
id = "clopper-pearson"
[[method]]
id = "jeffreys"
)";

double run_null(const e::Scenario& s, int threads) {
  const auto plan = e::make_plan(s);
  NullSink sink(plan.chunks.size());
  sink.set_combos(e::combo_count(s));
  e::RunOptions o;
  o.threads = threads;
  const double t0 = now();
  e::run_scenario(s, sink, o);
  return now() - t0;
}

void exact_scaling() {
  std::vector<m::MethodInstance> methods;
  for (const char* id : {"wald", "wilson", "agresti-coull", "clopper-pearson", "jeffreys"})
    methods.push_back(m::make_instance(id, {}));
  auto per_cell = [&](int n) {
    std::vector<e::IntervalTable> tables;
    for (const auto& mi : methods) tables.push_back(e::build_table(*mi.method, n, 0.95, m::Side::two_sided));
    e::BinomialWindow w;
    double sink = 0;
    const int points = 400;
    int reps = 0;
    const double t0 = now();
    double t = 0;
    do {
      for (int k = 0; k < points; ++k) {
        const double p = 0.05 + 0.9 * k / (points - 1);
        w.fill(n, p);
        for (const auto& tb : tables) sink += e::exact_metrics(tb, w, p)[0];
      }
      ++reps;
      t = now() - t0;
    } while (t < 1.0);
    if (sink < 0) fmt::print("impossible\n");
    return t / (reps * points);
  };
  const double small = per_cell(1000), large = per_cell(100000);
  fmt::print("exact-scaling: per (n, p) cell with 5 methods, p in [0.05, 0.95], one thread\n");
  fmt::print("  n = 1000: {:.3g} us/cell; n = 100000: {:.3g} us/cell\n", small * 1e6, large * 1e6);
  fmt::print("  ratio {:.2f} (sqrt(100) = 10 if cost grows like sqrt n; 100 if like n)\n", large / small);
}

void threads() {
  const auto s = covergrid::scenarios::load_scenario_text(std::string(R"(
[grid]
n = { from = 1, to = 500 }
p = { from = 0.001, to = 0.999, count = 400 }
levels = [0.95]
)") + five_methods,
                                                          "bench.toml", "");
  const double one = run_null(s, 1), two = run_null(s, 2);
  fmt::print("threads: {} cells (n = 1..500 x 400 p, 5 methods), whole run into a null sink\n",
             s.n.size() * s.p.size());
  fmt::print("  1 thread {:.3f} s, 2 threads {:.3f} s: speed-up {:.2f} (target >= 1.8)\n", one, two,
             one / two);
}

void prototype() {
  const auto s = covergrid::scenarios::load_scenario_text(std::string(R"(
[grid]
n = { from = 5, to = 200 }
p = { from = 0.0005, to = 0.9995, count = 2000 }
levels = [0.95]
)") + five_methods,
                                                          "bench.toml", "");
  const double t = run_null(s, 1);
  // Method-cells (one method at one (n, p)) on both sides: the prototype did
  // 196 x 2000 x 5 = 1.96e6 of them (coverage and width) in about 0.16 s,
  // 1.2e7 a second; ours compute all seven metrics and the row summaries.
  const double cells = static_cast<double>(s.n.size() * s.p.size() * s.methods.size());
  fmt::print(
      "prototype grid: n = 5..200 x 2000 p, 5 methods, one thread, evaluation into a null sink: {:.3f} s\n",
      t);
  fmt::print("  {:.3g} method-cells/s ({:.2f} x the prototype's 1.2e7 method-cells/s; target >= 5e6)\n",
             cells / t, cells / t / 1.2e7);
}

/// Child mode: run a grid with `points` p values to a cube in `dir`.
int memory_child(const std::string& dir, int points) {
  auto s = covergrid::scenarios::load_scenario_text(fmt::format(R"(
[grid]
n = {{ from = 10, to = 200, step = 10 }}
p = {{ from = 0.001, to = 0.999, count = {} }}
levels = [0.95]
[output]
cube = "mem-{}.h5"
tables = ""
)",
                                                                points, points) +
                                                        five_methods,
                                                    "bench.toml", dir);
  covergrid::output::OutputState st = covergrid::output::inspect_output(s, true);
  const auto plan = e::make_plan(s);
  covergrid::output::CubeWriter w(s, plan, st == covergrid::output::OutputState::resumed);
  e::run_scenario(s, w);
  std::filesystem::remove(s.cube_path);
  return 0;
}

long child_peak_kib(const char* self, const std::string& dir, int points) {
  const pid_t pid = fork();
  if (pid == 0) {
    const std::string p = std::to_string(points);
    execl(self, self, "memory-child", dir.c_str(), p.c_str(), static_cast<char*>(nullptr));
    _exit(127);
  }
  int status = 0;
  rusage usage{};
  wait4(pid, &status, 0, &usage);
  return usage.ru_maxrss;
}

void memory(const char* self) {
  const std::string dir = (std::filesystem::temp_directory_path() / "covergrid-bench-mem").string();
  std::filesystem::create_directories(dir);
  const long a = child_peak_kib(self, dir, 4000), b = child_peak_kib(self, dir, 40000),
             c = child_peak_kib(self, dir, 80000);
  std::filesystem::remove_all(dir);
  auto ratio = [](long x, long y) { return static_cast<double>(x) / static_cast<double>(y); };
  fmt::print("memory: peak RSS of a full run to a cube (20 n x P p x 5 methods x 1 level)\n");
  fmt::print("  P = 4000: {:.1f} MiB; P = 40000: {:.1f} MiB; P = 80000: {:.1f} MiB\n", ratio(a, 1024),
             ratio(b, 1024), ratio(c, 1024));
  fmt::print("  ratio {:.2f} for a 10x larger grid, {:.2f} for a further 2x (flat = 1)\n", ratio(b, a),
             ratio(c, b));
}

/// Monte Carlo: one cell, R = 1e5 replicates.
void mc_costs() {
  const int n = 200;
  const double p = 0.3;
  const std::uint64_t R = 100000;
  e::BinomialWindow w;
  w.fill(n, p);
  const e::CellStream stream(11, 0, n, 5);
  auto time_it = [](auto&& f) {
    int reps = 0;
    const double t0 = now();
    double t = 0;
    do {
      f();
      ++reps;
      t = now() - t0;
    } while (t < 0.5);
    return t / reps;
  };
  // The bare loop: uniforms from the same stream and the same sampler, no tally.
  e::WindowSampler sampler;
  sampler.build(w);
  std::vector<double> u(4096);
  long sink = 0;
  const double bare = time_it([&] {
    for (std::uint64_t done = 0; done < R; done += u.size()) {
      stream.uniforms(done, u.size(), u.data());
      for (double v : u) sink += sampler.draw(v);
    }
  });
  // Boost.Random's binomial (Mersenne Twister), for comparison.
  boost::random::mt19937_64 mt(5);
  boost::random::binomial_distribution<int> bd(n, p);
  const double boost_time = time_it([&] {
    for (std::uint64_t i = 0; i < R; ++i) sink += bd(mt);
  });
  auto cell = [&](const std::vector<const char*>& ids) {
    std::vector<m::MethodInstance> inst;
    std::vector<e::IntervalTable> tables;
    for (const char* id : ids) inst.push_back(m::make_instance(id, {}));
    for (const auto& mi : inst) tables.push_back(e::build_table(*mi.method, n, 0.95, m::Side::two_sided));
    std::vector<const e::IntervalTable*> ptrs;
    for (const auto& t : tables) ptrs.push_back(&t);
    e::CellDraws draws;
    const e::ReplicateRule rule{R, 0, 0};
    return time_it([&] {
      e::simulate_cell(w, stream, rule, ptrs, p, draws);
      for (const auto* t : ptrs) sink += static_cast<long>(e::mc_metrics(*t, w, draws, p)[0] * 1000);
    });
  };
  const double one = cell({"wilson"});
  std::vector<const char*> all;
  for (const auto& entry : m::registry())
    if (m::takes_defaults(entry)) all.push_back(entry.info.id.c_str());
  const double many = cell(all);
  if (sink == 42) fmt::print(" ");
  fmt::print("mc-costs: one cell, n = {}, p = {}, R = {} replicates, one thread\n", n, p, R);
  fmt::print("  bare sampler loop {:.2f} ns/draw; Boost.Random binomial {:.2f} ns/draw\n", bare / R * 1e9,
             boost_time / R * 1e9);
  fmt::print("  cell with 1 method {:.2f} ns/replicate: {:.2f} x the bare loop (target <= 2)\n",
             one / R * 1e9, one / bare);
  fmt::print("  cell with all {} methods {:.2f} ns/replicate: {:.2f} x one method (target <= 1.3)\n",
             all.size(), many / R * 1e9, many / one);
}

void mc_threads() {
  const auto s = covergrid::scenarios::load_scenario_text(std::string(R"(
[grid]
n = { from = 10, to = 400, step = 10 }
p = { from = 0.001, to = 0.999, count = 2500 }
levels = [0.95]
[evaluate]
exact = false
replicates = 1000
)") + five_methods,
                                                          "bench.toml", "");
  const double one = run_null(s, 1), two = run_null(s, 2);
  const double cells = static_cast<double>(s.n.size() * s.p.size());
  fmt::print("mc-threads: {} cells x 1000 replicates, 5 methods, Monte Carlo only, null sink\n",
             s.n.size() * s.p.size());
  fmt::print("  1 thread {:.3f} s, 2 threads {:.3f} s: speed-up {:.2f} (target >= 1.8)\n", one, two,
             one / two);
  fmt::print(
      "  {:.3g} cell-replicates/s on 2 threads; a grid of 1e5 cells x 1e4 replicates would take about"
      " {:.0f} s (linear extrapolation)\n",
      cells * 1000 / two, 1e5 * 1e4 / (cells * 1000 / two));
}

/// The sample-size search: wall time of plans over n up to 5000 on two
/// threads; the search against brute force (every n, full tables, whole
/// range) for a minimum-coverage plan on n up to 1500 and for margin-only
/// plans on n up to 5000 (where the closed form and the middle-x proofs
/// spare most tables); and the search on 2 threads against 1.
void plan_search() {
  using clock = std::chrono::steady_clock;
  auto seconds = [](auto a, auto b) { return std::chrono::duration<double>(b - a).count(); };
  auto request = [](const char* id, double lo, double hi, int to) {
    e::PlanRequest q;
    q.method = covergrid::methods::make_instance(id, {});
    q.level = 0.95;
    q.p_lo = lo;
    q.p_hi = hi;
    q.n_from = 1;
    q.n_to = to;
    return q;
  };
  // Brute force: every n of the range decided on its full table, on two threads.
  auto brute = [](const e::PlanRequest& q, auto meets) {
    std::vector<char> met(static_cast<std::size_t>(q.n_to) + 1, 0);
    tbb::task_arena arena(2);
    arena.execute([&] {
      tbb::parallel_for(q.n_from, q.n_to + 1, [&](int n) {
        const auto t = e::build_table(*q.method.method, n, q.level, q.side);
        met[static_cast<std::size_t>(n)] = meets(t) ? 1 : 0;
      });
    });
    int first = -1;
    for (int n = q.n_from; n <= q.n_to && first < 0; ++n)
      if (met[static_cast<std::size_t>(n)]) first = n;
    return first;
  };
  fmt::print("plan (sample-size search, two threads):\n");
  for (const char* id : {"wilson", "clopper-pearson", "jeffreys"}) {
    e::PlanRequest q = request(id, 0.05, 0.95, 5000);
    q.requirements = {{e::Requirement::min_coverage, 0.94}};
    const auto t0 = clock::now();
    const auto r = e::plan_sample_size(q, 2);
    const auto t1 = clock::now();
    fmt::print(
        "  {:<16} min coverage 0.94 over p in [0.05, 0.95], n = 1..5000: {:.2f} s (first n {}, from n {}, "
        "{} n evaluated)\n",
        id, seconds(t0, t1), r.found ? r.first.n : -1, r.stable_found ? r.stable.n : -1, r.evaluated);
  }
  {
    e::PlanRequest q = request("wilson", 0.05, 0.95, 1500);
    q.requirements = {{e::Requirement::min_coverage, 0.94}};
    const auto t0 = clock::now();
    const auto r = e::plan_sample_size(q, 2);
    const auto t1 = clock::now();
    const int first = brute(q, [](const e::IntervalTable& t) {
      return covergrid::engine::meets_coverage(e::coverage_infimum(t, 0.05, 0.95).value, 0.94);
    });
    const auto t2 = clock::now();
    fmt::print(
        "  wilson min coverage, n = 1..1500: search {:.2f} s, brute force over every n {:.2f} s: ratio "
        "{:.2f} "
        "(first n {} and {})\n",
        seconds(t0, t1), seconds(t1, t2), seconds(t0, t1) / seconds(t1, t2), r.first.n, first);
  }
  {
    // Threads: the same search, 1 thread then 2 (after the warm-up above).
    e::PlanRequest q = request("jeffreys", 0.05, 0.95, 2500);
    q.requirements = {{e::Requirement::min_coverage, 0.94}};
    const auto t0 = clock::now();
    const auto one = e::plan_sample_size(q, 1);
    const auto t1 = clock::now();
    const auto two = e::plan_sample_size(q, 2);
    const auto t2 = clock::now();
    fmt::print(
        "  jeffreys min coverage, n = 1..2500: 1 thread {:.2f} s, 2 threads {:.2f} s: speed-up {:.2f} (same "
        "answer: {})\n",
        seconds(t0, t1), seconds(t1, t2), seconds(t0, t1) / seconds(t1, t2),
        one.first.n == two.first.n && one.stable.n == two.stable.n ? "yes" : "NO");
  }
  for (const char* id : {"wilson", "wald-half", "clopper-pearson"}) {
    e::PlanRequest q = request(id, 0, 1, 5000);
    q.requirements = {{e::Requirement::max_margin, 0.03}};
    const auto t0 = clock::now();
    const auto r = e::plan_sample_size(q, 2);
    const auto t1 = clock::now();
    const int first = brute(q, [&](const e::IntervalTable& t) {
      double largest = 0;
      for (int x = 0; x <= t.n; ++x) {
        const std::size_t i = static_cast<std::size_t>(x);
        if (t.width[i] <= e::zero_width_tolerance) return false;
        largest = std::max(largest, e::margin_of_error(t.lower[i], t.upper[i], x, t.n, q.side));
      }
      return largest <= 0.03;
    });
    const auto t2 = clock::now();
    fmt::print(
        "  {:<16} max margin 0.03, n = 1..5000: search {:.3f} s, brute force over every n {:.2f} s: ratio "
        "{:.3f} "
        "(first n {} and {})\n",
        id, seconds(t0, t1), seconds(t1, t2), seconds(t0, t1) / seconds(t1, t2), r.first.n, first);
  }
}

/// Measured time of single chunks (one thread, tables built inside) against
/// the shard cut's cost estimate, both relative to the chunk at n = 1000.
void shard_cost() {
  fmt::print("shard-cost: one chunk (one n row x 2048 p, 5 methods, one level) timed against chunk_cost\n");
  for (const char* mc : {"exact = true\nreplicates = 0", "exact = false\nreplicates = 1000",
                         "exact = true\nreplicates = 1000"}) {
    const auto s = covergrid::scenarios::load_scenario_text(
        fmt::format(
            "[grid]\nn = [10, 100, 1000, 10000, 100000]\np = {{ from = 0.001, to = 0.999, count = 2048 "
            "}}\nlevels = 0.95\n[evaluate]\n{}\n",
            mc) +
            five_methods,
        "bench.toml", "");
    const auto plan = e::make_plan(s);
    std::vector<double> time, cost;
    for (const auto& c : plan.chunks) {
      int reps = 0;
      const double t0 = now();
      double t = 0;
      do {
        const auto r = e::compute_chunk(s, c);
        if (r.combos == 0) fmt::print("impossible\n");
        ++reps;
        t = now() - t0;
      } while (t < 0.3);
      time.push_back(t / reps);
      cost.push_back(e::chunk_cost(s, c));
    }
    std::string line;
    for (std::size_t i = 0; i < plan.chunks.size(); ++i)
      line += fmt::format("  n = {}: {:.1f} ms/chunk, time {:.2f}x vs cost {:.2f}x\n", s.n[i], 1e3 * time[i],
                          time[i] / time[2], cost[i] / cost[2]);
    std::string label = mc;
    label.replace(label.find('\n'), 1, ", ");
    fmt::print("  [{}]\n{}", label, line);
  }
}

/// Runs a shell command; throws when it fails.
void shell(const std::string& command) {
  if (std::system(command.c_str()) != 0) throw std::runtime_error("bench: failed: " + command);
}

double timed(const std::string& command) {
  const double t0 = now();
  shell(command);
  return now() - t0;
}

/// A sink that times what it forwards: the journal (chunks written,
/// checkpoints, rows read back) and the assembly of the cube (finish).
class TimedSink final : public e::ResultSink {
 public:
  explicit TimedSink(e::ResultSink& inner) : in_(inner) {}
  std::vector<char> completed() override { return in_.completed(); }
  void write_chunk(const e::ChunkResult& r) override {
    time(journal, [&] { in_.write_chunk(r); });
  }
  void checkpoint() override {
    time(journal, [&] { in_.checkpoint(); });
  }
  void read_rows(e::Source source, std::size_t metric, std::size_t model, std::size_t n_begin,
                 std::size_t n_count, std::size_t p_begin, std::size_t p_count,
                 std::vector<double>& out) override {
    time(journal, [&] { in_.read_rows(source, metric, model, n_begin, n_count, p_begin, p_count, out); });
  }
  void write_grid_stats(e::Source source, std::size_t model, std::size_t n_begin, std::size_t n_count,
                        const std::vector<double>& stats) override {
    time(journal, [&] { in_.write_grid_stats(source, model, n_begin, n_count, stats); });
  }
  void finish() override {
    time(assemble, [&] { in_.finish(); });
  }
  double journal = 0, assemble = 0;

 private:
  template <class F>
  static void time(double& into, F&& f) {
    const double t0 = now();
    f();
    into += now() - t0;
  }
  e::ResultSink& in_;
};

/// The yardstick script's median seconds (the line holding `marker`), or a
/// negative value when the script is not there.
double yardstick(const std::string& args, const std::string& marker) {
  const char* env = std::getenv("COVERGRID_YARDSTICK");
  const std::string script = env ? env : "../shared/bench/numpy_baseline.py";
  if (!std::filesystem::exists(script)) return -1;
  const std::string command = "/usr/bin/python3 " + script + " " + args + " 2>/dev/null";
  FILE* pipe = popen(command.c_str(), "r");
  if (!pipe) return -1;
  std::string out;
  char buffer[4096];
  while (std::fgets(buffer, sizeof buffer, pipe)) out += buffer;
  pclose(pipe);
  std::size_t line = out.find(marker);
  if (line == std::string::npos) return -1;
  const std::size_t at = out.find("total_seconds(median)=", line);
  if (at == std::string::npos) return -1;
  return std::strtod(out.c_str() + at + 22, nullptr);
}

double median(std::vector<double> v) {
  std::sort(v.begin(), v.end());
  return v.empty() ? 0.0 : v[v.size() / 2];
}

const char* prototype_grid = R"(
title = "prototype grid"
[grid]
n = { from = 5, to = 200 }
p = { from = 0.00025, to = 0.99975, count = 2000 }
levels = [0.95]
[output]
cube = "whole.h5"
tables = "whole"
)";

const char* mc_grid = R"(
title = "draws dominate"
seed = 20261203
[grid]
n = [10, 30, 100, 300]
p = { from = 0.0025, to = 0.9975, count = 200 }
levels = [0.95]
[evaluate]
exact = false
replicates = 100000
[output]
cube = "whole-mc.h5"
tables = "whole-mc"
)";

/// The whole process (`covergrid run`, cube and tables written, journal on)
/// against the numpy yardstick, interleaved, medians of `rounds`; then the
/// split of a one-thread exact run into its parts, in-process.
void whole() {
  const std::string dir = (std::filesystem::temp_directory_path() / "covergrid-bench-whole").string();
  std::filesystem::create_directories(dir);
  std::ofstream(dir + "/whole.toml") << prototype_grid << five_methods;
  std::ofstream(dir + "/whole-mc.toml") << mc_grid << five_methods;
  auto run = [&](const char* file, int threads) {
    // As a first run: the previous run's cube is removed beforehand, outside
    // the timing (overwriting it costs the file system its deletion).
    for (const char* cube : {"whole.h5", "whole-mc.h5"}) std::filesystem::remove(dir + "/" + cube);
    return timed(fmt::format("{} run {}/{} --threads {} --quiet --overwrite --yes > /dev/null", COVERGRID_EXE,
                             dir, file, threads));
  };
  const int rounds = 3;
  std::vector<double> np_exact, one, two, np_mc, mc_one, mc_two;
  for (int r = 0; r < rounds; ++r) {
    np_exact.push_back(yardstick("exact --n 5:200 --P 2000 --pmf logfact --repeat 1", "total_seconds"));
    one.push_back(run("whole.toml", 1));
    two.push_back(run("whole.toml", 2));
    np_mc.push_back(
        yardstick("mc --n 10,30,100,300 --P 200 --R 100000 --variants hist --repeat 1", "[hist]"));
    mc_one.push_back(run("whole-mc.toml", 1));
    mc_two.push_back(run("whole-mc.toml", 2));
  }
  const double ne = median(np_exact), no = median(one), nt = median(two);
  const double nm = median(np_mc), mo = median(mc_one), mt = median(mc_two);
  fmt::print(
      "whole: covergrid run (cube, tables, journal; no previous cube), medians of {} interleaved runs\n",
      rounds);
  fmt::print("  exact, n = 5..200 x 2000 p x 5 methods: 1 thread {:.3f} s, 2 threads {:.3f} s\n", no, nt);
  if (ne > 0)
    fmt::print(
        "    numpy log-factorial script {:.3f} s: {:.2f} x on 1 thread (target >= 3), {:.2f} x on 2 "
        "(target >= 5)\n",
        ne, ne / no, ne / nt);
  else
    fmt::print("    (numpy yardstick not found: set COVERGRID_YARDSTICK)\n");
  fmt::print(
      "  Monte Carlo, n = 10,30,100,300 x 200 p x 5 methods, R = 1e5: 1 thread {:.3f} s, 2 threads {:.3f} "
      "s\n",
      mo, mt);
  if (nm > 0)
    fmt::print("    numpy bincount script {:.3f} s: {:.2f} x on 1 thread (target >= 8), {:.2f} x on 2\n", nm,
               nm / mo, nm / mt);

  // The split, in-process, one thread: evaluation alone (null sink), then the
  // same run into the cube with its journal and assembly timed, then tables.
  const auto s = covergrid::scenarios::load_scenario_text(std::string(prototype_grid) + five_methods,
                                                          dir + "/whole.toml", dir);
  const double evaluate = run_null(s, 1);
  const auto state = covergrid::output::inspect_output(s, true);
  const auto plan = e::make_plan(s);
  double run_time = 0, tables = 0;
  TimedSink* timed_sink = nullptr;
  {
    covergrid::output::CubeWriter writer(s, plan, state == covergrid::output::OutputState::resumed);
    TimedSink sink(writer);
    timed_sink = &sink;
    e::RunOptions o;
    o.threads = 1;
    const double t0 = now();
    e::run_scenario(s, sink, o);
    run_time = now() - t0;
    const double t1 = now();
    covergrid::output::write_tables(covergrid::output::CubeReader(s.cube_path), s.tables_prefix);
    tables = now() - t1;
    const double journal = timed_sink->journal, assemble = timed_sink->assemble;
    const double computing = run_time - journal - assemble, total = run_time + tables;
    fmt::print("  split of a one-thread exact run in-process ({:.3f} s; evaluation alone {:.3f} s):\n", total,
               evaluate);
    fmt::print(
        "    evaluate {:.3f} s ({:.0f} %), journal and cube chunks {:.3f} s ({:.0f} %), cube finish {:.3f} s "
        "({:.0f} %), tables {:.3f} s ({:.0f} %)\n",
        computing, 100 * computing / total, journal, 100 * journal / total, assemble, 100 * assemble / total,
        tables, 100 * tables / total);
    fmt::print("    output (journal, cube, tables) {:.0f} % of the run (target <= 33 %)\n",
               100 * (journal + assemble + tables) / total);
    const double method_cells = static_cast<double>(s.n.size() * s.p.size() * s.methods.size());
    fmt::print("    evaluation {:.3g} method-cells/s per thread (target >= 5e6)\n", method_cells / evaluate);
    const double evaluate_two = run_null(s, 2);
    fmt::print("    evaluation alone on 2 threads {:.3f} s ({:.2f} x one thread's)\n", evaluate_two,
               evaluate / evaluate_two);
  }
}

/// Shard balance: the 4 shards of a grid whose chunk costs differ 100-fold,
/// each run alone on one thread (null sink), against the total.
void shards() {
  const auto s = covergrid::scenarios::load_scenario_text(std::string(R"(
[grid]
n = { from = 10, to = 20000, count = 24, spacing = "log" }
p = { from = 0.001, to = 0.999, count = 2048 }
levels = [0.95]
)") + five_methods,
                                                          "bench.toml", "");
  const auto plan = e::make_plan(s);
  const std::size_t N = 4;
  std::vector<double> t;
  for (std::size_t k = 1; k <= N; ++k) {
    const auto ids = e::shard_chunks(s, plan, {k, N});
    NullSink sink(plan.chunks.size());
    sink.set_combos(e::combo_count(s));
    e::RunOptions o;
    o.threads = 1;
    o.only_chunks = &ids;
    const double t0 = now();
    e::run_scenario(s, sink, o);
    t.push_back(now() - t0);
  }
  const double lo = *std::min_element(t.begin(), t.end()), hi = *std::max_element(t.begin(), t.end());
  fmt::print("shards: 4 shards of n = 10..20000 (24 rows, log) x 2048 p, 5 methods, one thread each\n");
  fmt::print("  {:.2f} / {:.2f} / {:.2f} / {:.2f} s: slowest over fastest {:.2f} (1 = even)\n", t[0], t[1],
             t[2], t[3], hi / lo);
}

/// Merge: 4 shard cubes of a grid joined into one cube; seconds per GB of
/// the merged cube (a cube of about 0.2 GB, so the bench stays short; the
/// merge streams chunk by chunk, so its time grows linearly with the size).
void merge_cost() {
  namespace fs = std::filesystem;
  const fs::path dir = fs::temp_directory_path() / "covergrid-bench-merge";
  fs::remove_all(dir);
  fs::create_directories(dir);
  std::ofstream(dir / "m.toml") << std::string(R"(
[grid]
n = { from = 1, to = 240 }
p = { from = 0.0005, to = 0.9995, count = 2000 }
levels = [0.9, 0.95]
[output]
cube = "m.h5"
tables = ""
)") + five_methods;
  const std::string exe = COVERGRID_EXE, where = "cd '" + dir.string() + "' && ";
  const double single = timed(where + "'" + exe + "' run m.toml --quiet >/dev/null");
  for (int k = 1; k <= 4; ++k)
    shell(where + "'" + exe + "' run m.toml --quiet --shard " + std::to_string(k) + "/4 >/dev/null");
  const double merge =
      timed(where + "'" + exe + "' merge m.shard-*-of-4.h5 -o merged.h5 --quiet --no-tables >/dev/null");
  const double gb = static_cast<double>(fs::file_size(dir / "merged.h5")) / 1e9;
  fs::remove_all(dir);
  fmt::print("merge: 4 shards of n = 1..240 x 2000 p, 5 methods, 2 levels (exact) into a {:.3f} GB cube\n",
             gb);
  fmt::print(
      "  merge {:.2f} s = {:.1f} s per GB of cube (linear in the size; measured at {:.2f} GB); the single "
      "run "
      "took {:.2f} s (2 threads)\n",
      merge, merge / gb, gb, single);
}

/// The estimate `run` prints before it starts, against the wall time of the
/// same run to a cube (2 threads), for grids of different shapes.
void estimate_accuracy() {
  namespace fs = std::filesystem;
  const fs::path dir = fs::temp_directory_path() / "covergrid-bench-estimate";
  struct Grid {
    const char* name;
    const char* grid;
  };
  const Grid grids[] = {
      {"small n, exact", "n = { from = 1, to = 200 }\np = { from = 0.001, to = 0.999, count = 2000 }\n"},
      {"large n, exact",
       "n = { from = 1000, to = 20000, count = 20, spacing = \"log\" }\n"
       "p = { from = 0.001, to = 0.999, count = 2000 }\n"},
      {"exact + 2000 replicates",
       "n = { from = 10, to = 400, step = 10 }\np = { from = 0.01, to = 0.99, count = 1000 }\n"
       "[evaluate]\nreplicates = 2000\n"}};
  fmt::print("estimate: run's up-front estimate against the measured run (2 threads, 5 methods, 95 %)\n");
  for (const auto& g : grids) {
    fs::remove_all(dir);
    fs::create_directories(dir);
    const std::string text = std::string("[grid]\nlevels = [0.95]\n") + g.grid + five_methods +
                             "[output]\ncube = \"e.h5\"\ntables = \"\"\n";
    std::ofstream(dir / "e.toml") << text;
    const auto s = covergrid::scenarios::load_scenario_file((dir / "e.toml").string());
    const auto plan = e::make_plan(s);
    std::vector<std::size_t> all(plan.chunks.size());
    for (std::size_t i = 0; i < all.size(); ++i) all[i] = i;
    const auto est = e::estimate_run(s, plan, all, 2);
    const double actual = timed("cd '" + dir.string() + "' && '" + std::string(COVERGRID_EXE) +
                                "' run e.toml --quiet >/dev/null");
    fmt::print(
        "  {:<24} estimate {:7.2f} s (calibration {:.2f} s, {} chunks)  measured {:7.2f} s  ratio {:.2f}\n",
        g.name, est.seconds, est.calibration_seconds, est.chunks_timed, actual, est.seconds / actual);
  }
  fs::remove_all(dir);
}

/// MPI: 2 ranks x 1 thread against 1 rank x 1 thread, the whole run (start,
/// compute, cube), on 1e5 cells; needs the MPI build (COVERGRID_MPI_EXE) and
/// its mpirun (COVERGRID_MPIRUN), which scripts/bench sets.
void mpi_speedup() {
  namespace fs = std::filesystem;
  const char* exe = std::getenv("COVERGRID_MPI_EXE");
  const char* mpirun = std::getenv("COVERGRID_MPIRUN");
  if (!exe || !mpirun) {
    fmt::print("mpi: skipped (set COVERGRID_MPI_EXE and COVERGRID_MPIRUN; scripts/bench does)\n");
    return;
  }
  const fs::path dir = fs::temp_directory_path() / "covergrid-bench-mpi";
  fs::remove_all(dir);
  fs::create_directories(dir);
  std::ofstream(dir / "m.toml") << std::string(R"(
seed = 1
[grid]
n = { from = 10, to = 400, step = 10 }
p = { from = 0.0004, to = 0.9996, count = 2500 }
levels = [0.95]
[evaluate]
replicates = 2000
[output]
cube = "m.h5"
tables = ""
)") + five_methods;
  const std::string base = fmt::format(
      "cd '{}' && OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1 '{}' "
      "--oversubscribe -n ",
      dir.string(), mpirun);
  const std::string log = (dir / "progress.txt").string();
  const std::string run = fmt::format(" '{}' run m.toml --threads 1 --overwrite >/dev/null 2>'{}'", exe, log);
  // The compute phase's rate: the last progress line's cells/s (the run's
  // own figure, from its first chunk to its last).
  auto rate = [&] {
    std::ifstream in(log);
    const std::string text((std::istreambuf_iterator<char>(in)), {});
    const auto end = text.rfind(" cells/s");
    const auto begin = text.rfind(", ", end);
    return std::stod(text.substr(begin + 2, end - begin - 2));
  };
  double one = 1e300, two = 1e300, rate_one = 0, rate_two = 0;
  for (int rep = 0; rep < 2; ++rep) {
    one = std::min(one, timed(base + "1" + run));
    rate_one = std::max(rate_one, rate());
    two = std::min(two, timed(base + "2" + run));
    rate_two = std::max(rate_two, rate());
  }
  fs::remove_all(dir);
  fmt::print(
      "mpi: 1e5 cells (n = 10..400 step 10 x 2500 p, 5 methods, exact + 2000 replicates), whole run "
      "under mpirun, best of 2\n");
  fmt::print("  1 rank x 1 thread {:.2f} s, 2 ranks x 1 thread {:.2f} s: speed-up {:.2f} (2 cores)\n", one,
             two, one / two);
  fmt::print(
      "  chunk phase alone: {:.3g} against {:.3g} cells/s: speed-up {:.2f} (the rest is mpirun's start and "
      "the cube's assembly on rank 0)\n",
      rate_one, rate_two, rate_two / rate_one);
}

}  // namespace

/// Every catalog method's table (default parameters, 95 %, each side it
/// supports) at one n, on one thread: the cost a run pays before its first
/// cell, and what an audit over large n pays per n.
void tables(int n) {
  fmt::print("tables: one interval table per method and side at n = {}, level 0.95, one thread\n", n);
  double fastest = 0, slowest = 0, total = 0;
  std::string slowest_id;
  for (const auto& entry : m::registry()) {
    if (!m::takes_defaults(entry)) continue;
    const auto mi = m::make_instance(entry.info.id, {});
    for (const auto side : {m::Side::two_sided, m::Side::lower_bound}) {
      if (!mi.method->supports(side)) continue;
      const double t0 = now();
      const auto t = e::build_table_mirrored(*mi.method, n, 0.95, side);
      const double dt = now() - t0;
      if (t.width.empty()) fmt::print("impossible\n");
      fmt::print("  {:<24} {:<12} {:8.3f} s\n", entry.info.id, m::side_name(side), dt);
      total += dt;
      if (fastest == 0 || dt < fastest) fastest = dt;
      if (dt > slowest) slowest = dt, slowest_id = entry.info.id;
    }
  }
  fmt::print("  total {:.2f} s; slowest {} {:.3f} s = {:.0f}x the fastest table\n", total, slowest_id,
             slowest, slowest / fastest);
}

int main(int argc, char** argv) {
  const std::string what = argc > 1 ? argv[1] : "all";
  if (what == "memory-child") return memory_child(argv[2], std::atoi(argv[3]));
  if (what == "all" || what == "exact-scaling") exact_scaling();
  if (what == "all" || what == "threads") threads();
  if (what == "all" || what == "prototype") prototype();
  if (what == "all" || what == "whole") whole();
  if (what == "all" || what == "memory") memory(argv[0]);
  if (what == "all" || what == "mc-costs") mc_costs();
  if (what == "all" || what == "mc-threads") mc_threads();
  if (what == "all" || what == "plan") plan_search();
  if (what == "all" || what == "estimate") estimate_accuracy();
  if (what == "all" || what == "shard-cost") shard_cost();
  if (what == "all" || what == "shards") shards();
  if (what == "all" || what == "merge") merge_cost();
  if (what == "all" || what == "mpi") mpi_speedup();
  if (what == "all" || what == "tables") tables(what == "tables" && argc > 2 ? std::atoi(argv[2]) : 100000);
  return 0;
}
