#pragma once
/// The plain scenario structs the engine consumes. scenarios/ fills them from
/// TOML; tests and the command line may fill them directly.
#include "covergrid/engine/sampling_model.hpp"
#include "covergrid/methods/interval.hpp"
#include "covergrid/methods/registry.hpp"

#include <cstdint>
#include <memory>
#include <string>
#include <vector>

namespace covergrid::engine {

using methods::Side;

struct ModelSpec {
  std::string label = "binomial";
  std::shared_ptr<const SamplingModel> model = binomial_model_ptr();  // what the engine evaluates
  methods::ParamValues params;  // the model's resolved parameters (recorded on /axes/model)
};

struct Scenario {
  std::string title;
  std::uint64_t seed = 0;

  std::vector<int> n;          // strictly increasing, >= 1
  std::vector<double> p;       // strictly increasing, in [0, 1]
  std::vector<double> levels;  // strictly increasing, in (0, 1)
  std::vector<Side> sides;     // distinct

  bool exact = true;
  std::uint64_t replicates = 0;      // Monte Carlo replicates per cell; 0 = none
  double target_se = 0;              // > 0: replicates per cell chosen to reach this coverage SE
  std::uint64_t max_replicates = 0;  // the cap when target_se > 0

  std::vector<methods::MethodInstance> methods;
  std::vector<ModelSpec> models;

  std::string cube_path;      // resolved against the scenario file's folder
  std::string tables_prefix;  // idem; empty = no tables

  std::string source_name;  // file name for messages ("<bundled demo>" etc.)
  std::string source_text;  // the full scenario text, stored in the cube
  std::string sha256;       // of source_text
};

/// Largest grid a scenario may ask for, in (model, n, p) cells: 10^9 cells
/// are ~5·10^5 chunks to plan and, for one (method, level, side), 56 GB of
/// exact metrics. The scenario loader refuses more; the cube reader refuses
/// a cube whose axes declare more before it reads them.
inline constexpr double max_grid_cells = 1e9;
/// Largest number of (method, level, side) combinations: every chunk in
/// flight holds 2048 cells x combinations x 7 metrics (470 MB at 4096).
inline constexpr std::size_t max_combinations = 4096;
/// Largest number of values on the n or the p axis.
inline constexpr std::size_t max_axis_values = 10'000'000;

/// Number of (side, level, method) combinations; their order everywhere is
/// side-major, then level, then method (the cube's axis order).
inline std::size_t combo_count(const Scenario& s) {
  return s.sides.size() * s.levels.size() * s.methods.size();
}

}  // namespace covergrid::engine
