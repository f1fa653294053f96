#pragma once
/// The visual report (`covergrid report`; README, "The report"): one
/// self-contained HTML page with inline SVG and CSS (no scripts, no network,
/// no other files), one section per (model, side, level) of a complete cube.
#include "covergrid/output/cube.hpp"

#include <cstdint>
#include <string>
#include <vector>

namespace covergrid::output {

struct ReportOptions {
  /// The n values whose coverage and width are drawn against p and listed in
  /// the summary table; each must be on the cube's n axis. Empty: up to
  /// six values spread evenly over the axis (all of them when it has six or fewer).
  std::vector<std::int64_t> n;
  /// Heat-map bins per axis (n and p); a larger axis is binned down, each
  /// bin showing the minimum coverage over its cells.
  std::size_t max_bins = 80;
  /// Points per drawn curve; a longer p axis keeps, per run of points, the
  /// lowest and the highest (so spikes survive).
  std::size_t max_points = 200;
};

/// The heat-map colour class (0 = furthest below nominal .. 7 = furthest
/// above; 8 = no value, for NaN) of a coverage figure at a nominal `level`.
/// The classes are ranges of coverage minus nominal in multiples of
/// alpha = 1 - level: below -4, -4 to -2, -2 to -1, -1 to -1/2, -1/2 to -1/5,
/// within +-1/5, 1/5 to 1/2, 1/2 or more. A figure reaches a class whose
/// lower edge is at or below nominal by engine::meets_coverage(coverage,
/// nominal + edge), the rule every command judges coverage by, so that
/// 0.89999999999999969 at 90 % is within +-alpha/5 as audit says it meets 90 %.
std::size_t coverage_class(double coverage, double level);

/// Indices on the cube's n axis of the n values a report draws (see
/// ReportOptions::n). InputError naming "--n" for a value not on the axis.
std::vector<std::size_t> report_n_indices(const CubeReader& cube, const std::vector<std::int64_t>& n);

/// Writes the report of `cube` to `html_path` (under a temporary name,
/// renamed when complete). InputError (exit 2) for an incomplete or damaged
/// cube, bad options, an output folder that does not exist or cannot be
/// written, an output path that is the cube itself or an existing file that
/// is not an earlier report; nothing is written or changed at `html_path` then.
void write_report(const CubeReader& cube, const ReportOptions& options, const std::string& html_path);

/// SHA-256 of a file's bytes, read in pieces (the cube may be large).
std::string file_sha256(const std::string& path);

}  // namespace covergrid::output
