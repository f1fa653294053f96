#pragma once
/// The scenario loader: TOML text in, validated plain engine::Scenario out.
/// Nothing else in covergrid reads TOML. Every error is an InputError whose
/// message names the file, the line and the key ("demo.toml:14: [grid] p.to =
/// 1.2 is outside [0, 1]").
#include "covergrid/engine/scenario.hpp"

#include <cstddef>
#include <cstdint>
#include <string>
#include <string_view>

namespace covergrid::scenarios {

/// Reads and validates a scenario file; output paths resolve against its folder.
engine::Scenario load_scenario_file(const std::string& path);

/// Validates scenario text; `source_name` is used in messages and `base_dir`
/// to resolve relative output paths ("" = current directory). With
/// `check_output_folders` false the output folders need not exist (a
/// scenario read back from a cube on another machine, whose outputs the
/// caller replaces).
engine::Scenario load_scenario_text(std::string_view text, const std::string& source_name,
                                    const std::string& base_dir, bool check_output_folders = true);

/// The bundled demo scenario (scenarios/bundled/demo.toml, compiled in).
std::string_view bundled_demo_text();

/// Largest sample size a scenario may ask for.
inline constexpr int max_sample_size = 10'000'000;
/// The grid limits (engine/scenario.hpp), refused up front.
using engine::max_combinations;
using engine::max_grid_cells;
/// Largest number of Monte Carlo replicates a cell may ask for.
inline constexpr std::int64_t max_replicates_per_cell = 10'000'000'000;

}  // namespace covergrid::scenarios
