#pragma once
/// The result cube (design section 8): writing it as a ResultSink, with
/// resume, and reading it back.
///
/// Layout: root attributes format, format_version, tool_version, title,
/// scenario, scenario_sha256, seed, created_utc, shard, complete;
/// /axes/{model,side,level,method,n,p} dimension scales; /methods/<label>
/// groups; /exact/<metric> float64 [model, side, level, method, n, p];
/// /summary/<stat> float64 [model, side, level, method, n]; /progress/done
/// uint8 [chunk] with attributes n_block and p_block.
#include "covergrid/engine/plan.hpp"
#include "covergrid/engine/scenario.hpp"
#include "covergrid/engine/sink.hpp"
#include "covergrid/output/hdf5.hpp"

#include <array>
#include <map>
#include <string>
#include <vector>

namespace covergrid::output {

inline constexpr const char* cube_format_name = "covergrid-cube";
inline constexpr std::array<const char*, 6> axis_names = {"model", "side", "level", "method", "n", "p"};

/// The temporary name a cube is written under until it is complete.
std::string partial_path(const std::string& cube_path);

/// What preparing the output found.
enum class OutputState { fresh, resumed, up_to_date };

/// Decides, before anything is written, what a run of `scenario` into its cube
/// path will do: start fresh, resume an unfinished run of the same scenario,
/// or find a complete cube of it. Throws InputError (exit 2) for a cube or an
/// unfinished run of a different scenario, unless `overwrite`.
OutputState inspect_output(const engine::Scenario& scenario, bool overwrite);

/// Writes the cube under partial_path() and renames it on finish().
class CubeWriter final : public engine::ResultSink {
 public:
  /// Opens (resume) or creates the partial file; call inspect_output() first.
  CubeWriter(const engine::Scenario& scenario, const engine::Plan& plan, bool resume);
  ~CubeWriter() override = default;

  std::vector<char> completed() override;
  void write_chunk(const engine::ChunkResult& result) override;
  void checkpoint() override;
  void read_rows(engine::Metric metric, std::size_t model, std::size_t n_begin, std::size_t n_count,
                 std::size_t p_begin, std::size_t p_count, std::vector<double>& out) override;
  void write_grid_stats(std::size_t model, std::size_t n_begin, std::size_t n_count,
                        const std::vector<double>& stats) override;
  void finish() override;

 private:
  void create_layout();
  const engine::Scenario& scenario_;
  const engine::Plan& plan_;
  std::string final_path_, temp_path_;
  File file_;
  std::vector<Handle> exact_;    // one per metric
  std::vector<Handle> summary_;  // one per stat
  Handle done_;
  std::vector<std::size_t> pending_;  // chunks written since the last checkpoint
};

/// A cube opened for reading; validates the format on open (InputError if the
/// file is not a covergrid cube of a supported version).
class CubeReader {
 public:
  explicit CubeReader(const std::string& path);

  const std::string& path() const { return path_; }
  std::string attr(const std::string& name) const;
  bool complete() const { return complete_; }

  std::vector<std::string> models, sides, methods;
  std::vector<double> levels, p;
  std::vector<std::int64_t> n;
  /// Per method label: its attributes (id, name, family, reference, param.*).
  std::map<std::string, std::map<std::string, std::string>> method_info;

  bool has_exact() const;
  /// A summary statistic, whole, laid out [model][side][level][method][n].
  std::vector<double> summary(const std::string& stat) const;
  /// One exact metric over p for a single (model, side, level, method, n).
  std::vector<double> exact_row(const std::string& metric, std::size_t model, std::size_t side,
                                std::size_t level, std::size_t method, std::size_t n_index) const;
  std::size_t summary_index(std::size_t model, std::size_t side, std::size_t level, std::size_t method,
                            std::size_t n_index) const {
    return (((model * sides.size() + side) * levels.size() + level) * methods.size() + method) * n.size() +
           n_index;
  }

 private:
  std::string path_;
  File file_;
  bool complete_ = false;
};

}  // namespace covergrid::output
