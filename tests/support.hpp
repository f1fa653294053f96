#pragma once
// Shared helpers for the tests: scratch folders, scenario text, an in-memory sink.
#include "covergrid/engine/run.hpp"
#include "covergrid/engine/sink.hpp"
#include "covergrid/scenarios/loader.hpp"

#include <filesystem>
#include <map>
#include <stdexcept>
#include <random>
#include <string>
#include <vector>

namespace covergrid::test {

/// A method whose lower limit fails at x = 7, as a Boost function does
/// (std::overflow_error); every other limit is [0, 1].
class FailsAtSeven final : public methods::IntervalMethod {
 public:
  double lower(int x, int, double) const override {
    if (x == 7) throw std::overflow_error("Error in function boost::math::something: Overflow Error");
    return 0.0;
  }
  double upper(int, int, double) const override { return 1.0; }
};

/// A fresh, empty folder under the system temp dir, removed on destruction.
class ScratchDir {
 public:
  explicit ScratchDir(const std::string& name) {
    path_ = std::filesystem::temp_directory_path() /
            ("covergrid-test-" + name + "-" + std::to_string(std::random_device{}()));
    std::filesystem::remove_all(path_);
    std::filesystem::create_directories(path_);
  }
  ~ScratchDir() {
    std::error_code ec;
    std::filesystem::remove_all(path_, ec);
  }
  const std::filesystem::path& path() const { return path_; }
  std::string file(const std::string& name) const { return (path_ / name).string(); }

 private:
  std::filesystem::path path_;
};

/// Keeps every chunk and the grid statistics in memory, laid out
/// [model][combo][n][p] (metrics) and [model][combo][n] (statistics).
class MemorySink final : public engine::ResultSink {
 public:
  MemorySink(const engine::Scenario& s, const engine::Plan& plan) : s_(s) {
    const std::size_t rows = s.models.size() * s.n.size();
    const std::size_t combos = engine::combo_count(s);
    for (auto& m : exact) m.assign(combos * rows * s.p.size(), 0.0);
    for (auto& m : mc) m.assign(combos * rows * s.p.size(), 0.0);
    mc_replicates.assign(rows * s.p.size(), 0.0);
    for (auto& st : stats) st.assign(combos * rows, 0.0);
    for (auto& st : mc_stats) st.assign(combos * rows, 0.0);
    done.assign(plan.chunks.size(), 0);
  }
  std::vector<char> completed() override { return done; }
  void write_chunk(const engine::ChunkResult& r) override {
    const auto& c = r.spec;
    const std::size_t P = s_.p.size();
    auto scatter = [&](const std::vector<double>& from, std::vector<double>& to) {
      for (std::size_t cb = 0; cb < r.combos; ++cb)
        for (std::size_t i = 0; i < c.n_count; ++i)
          for (std::size_t j = 0; j < c.p_count; ++j)
            to[at(cb, c.model, c.n_begin + i) * P + c.p_begin + j] =
                from[(cb * c.n_count + i) * c.p_count + j];
    };
    auto scatter_stat = [&](const std::vector<double>& from, std::vector<double>& to) {
      for (std::size_t cb = 0; cb < r.combos; ++cb)
        for (std::size_t i = 0; i < c.n_count; ++i)
          to[at(cb, c.model, c.n_begin + i)] = from[cb * c.n_count + i];
    };
    if (r.has_exact)
      for (std::size_t k = 0; k < engine::metric_count; ++k) scatter(r.exact[k], exact[k]);
    if (r.has_mc) {
      for (std::size_t k = 0; k < engine::mc_metric_count; ++k) scatter(r.mc[k], mc[k]);
      for (std::size_t i = 0; i < c.n_count; ++i)
        for (std::size_t j = 0; j < c.p_count; ++j)
          mc_replicates[(c.model * s_.n.size() + c.n_begin + i) * P + c.p_begin + j] =
              r.mc_replicates[i * c.p_count + j];
    }
    if (r.has_grid_stats)
      for (std::size_t k = 0; k < engine::grid_stat_count; ++k) scatter_stat(r.grid_stats[k], stats[k]);
    if (r.has_mc_grid_stats)
      for (std::size_t k = 0; k < engine::grid_stat_count; ++k) scatter_stat(r.mc_grid_stats[k], mc_stats[k]);
    if (r.has_row_stats)
      for (std::size_t k = 0; k < r.row_stats.size(); ++k)
        scatter_stat(r.row_stats[k], stats[engine::grid_stat_count + k]);
    done[c.id] = 1;
    ++chunks_written;
  }
  void checkpoint() override { ++checkpoints; }
  void read_rows(engine::Source source, std::size_t metric, std::size_t model, std::size_t n_begin,
                 std::size_t n_count, std::size_t p_begin, std::size_t p_count,
                 std::vector<double>& out) override {
    const std::size_t combos = engine::combo_count(s_), P = s_.p.size();
    const auto& from = source == engine::Source::exact ? exact.at(metric) : mc.at(metric);
    out.assign(combos * n_count * p_count, 0.0);
    for (std::size_t cb = 0; cb < combos; ++cb)
      for (std::size_t i = 0; i < n_count; ++i)
        for (std::size_t j = 0; j < p_count; ++j)
          out[(cb * n_count + i) * p_count + j] = from[at(cb, model, n_begin + i) * P + p_begin + j];
  }
  void write_grid_stats(engine::Source source, std::size_t model, std::size_t n_begin, std::size_t n_count,
                        const std::vector<double>& st) override {
    const std::size_t combos = engine::combo_count(s_);
    for (std::size_t k = 0; k < engine::grid_stat_count; ++k) {
      auto& to = source == engine::Source::exact ? stats[k] : mc_stats[k];
      for (std::size_t cb = 0; cb < combos; ++cb)
        for (std::size_t i = 0; i < n_count; ++i)
          to[at(cb, model, n_begin + i)] = st[(k * combos + cb) * n_count + i];
    }
  }
  void finish() override { finished = true; }

  /// Row index of (combo, model, n index) in the [model][combo][n] layout used here.
  std::size_t at(std::size_t combo, std::size_t model, std::size_t n_index) const {
    return (model * engine::combo_count(s_) + combo) * s_.n.size() + n_index;
  }

  std::array<std::vector<double>, engine::metric_count> exact;
  std::array<std::vector<double>, engine::mc_metric_count> mc;
  std::vector<double> mc_replicates;
  std::array<std::vector<double>, engine::stat_count> stats;
  std::array<std::vector<double>, engine::grid_stat_count> mc_stats;
  std::vector<char> done;
  std::size_t chunks_written = 0, checkpoints = 0;
  bool finished = false;

 private:
  const engine::Scenario& s_;
};

/// Loads scenario text (relative outputs resolve into `dir`).
inline engine::Scenario scenario_from(const std::string& text, const std::string& dir = "",
                                      const std::string& name = "test.toml") {
  return scenarios::load_scenario_text(text, name, dir);
}

}  // namespace covergrid::test
