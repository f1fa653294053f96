#pragma once
/// The plain scenario structs the engine consumes. scenarios/ fills them from
/// TOML; tests and the command line may fill them directly.
#include "covergrid/methods/interval.hpp"
#include "covergrid/methods/registry.hpp"

#include <cstdint>
#include <string>
#include <vector>

namespace covergrid::engine {

using methods::Side;

enum class ModelKind { binomial };

struct ModelSpec {
  ModelKind kind = ModelKind::binomial;
  std::string label = "binomial";
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

/// Number of (side, level, method) combinations; their order everywhere is
/// side-major, then level, then method (the cube's axis order).
inline std::size_t combo_count(const Scenario& s) {
  return s.sides.size() * s.levels.size() * s.methods.size();
}

}  // namespace covergrid::engine
