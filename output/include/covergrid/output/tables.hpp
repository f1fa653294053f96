#pragma once
/// Summary tables from a cube: CSV for machines, Markdown for people, and the
/// headline text the terminal shows. Our own layout.
#include "covergrid/output/cube.hpp"

#include <string>
#include <vector>

namespace covergrid::output {

/// One method's standing over the whole n range of a (model, side, level).
struct RankingRow {
  std::size_t model, side, level, method;
  int rank = 0;
  bool meets_nominal = true;  // worst_inf meets nominal under engine::meets_coverage
  double worst_inf = 0;       // min over n of the continuous infimum
  std::int64_t worst_inf_n = 0;
  double mean_coverage = 0;  // mean over n of the exact uniform mean coverage
  double rms_deviation = 0;  // mean over n of the grid RMS deviation from nominal
  double share_below = 0;    // mean over n of the share of grid p below nominal
  double mean_width = 0;     // mean over n of the grid mean width
  /// True for a row from the simulated figures in a cube that has exact
  /// ones: a method that needs the cluster counts has no exact cells under a
  /// clustered model. Such rows follow the exact ones, ranked among
  /// themselves, with worst = the smallest simulated coverage on the grid.
  bool simulated = false;
};

/// Ranking per (model, side, level) over the whole n range, in the order
/// `covergrid rank --criterion shortest --bands <all n>` gives (ranks_before
/// in rank.hpp): the methods whose worst coverage meets nominal first, by
/// mean width, then the others by worst coverage. Methods that do not define
/// a side are left out; methods with simulated figures only follow the rest
/// (RankingRow::simulated).
std::vector<RankingRow> ranking(const CubeReader& cube);

/// Writes <prefix>-summary.csv, <prefix>-ranking.csv and <prefix>-summary.md
/// (each to a temporary name, renamed when complete); returns their paths.
std::vector<std::string> write_tables(const CubeReader& cube, const std::string& prefix);

/// The sentence that says how ranking() orders the methods (headline, tables, report).
extern const char* const ranking_order_text;

/// The order sentence and one explanation per column of the ranking table
/// (headline, Markdown summary, report); `exact` picks the exact or the
/// simulated wording.
/// `simulated_rows`: some rows are simulated only (RankingRow::simulated),
/// which a sentence then explains.
std::string ranking_footnote(bool exact, bool simulated_rows = false);

/// True when some row of `rows` is simulated only.
bool has_simulated_rows(const std::vector<RankingRow>& rows);

/// The headline: the ranking as an aligned text table, a footnote on every
/// column, and the cautions.
std::string headline(const CubeReader& cube);

/// A number in CSV output, by the one precision policy of every CSV file
/// covergrid writes: the shortest decimal text that reads back as the same
/// double (round-trip exact, e.g. 0.95, not 0.94999999999999996); NaN and
/// infinities (undefined values) as an empty field.
std::string csv_number(double v);

/// The cautions every report and table carries.
extern const char* const coverage_caution;

/// Writes `text` to `path` under the temporary name PATH.partial and renames
/// it into place, so a failure never leaves a partial file; InputError (exit
/// 2) for a missing folder or an unwritable path.
void write_text_atomically(const std::string& path, const std::string& text);

/// `text` broken into lines of at most `width` characters at spaces (for the
/// terminal), ending with a newline.
std::string wrap_text(const std::string& text, std::size_t width = 78);

}  // namespace covergrid::output
