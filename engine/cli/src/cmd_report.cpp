// covergrid report: the cube as one self-contained HTML page (output/report.hpp).
#include "commands.hpp"
#include "covergrid/engine/output_location.hpp"
#include "covergrid/output/cube.hpp"
#include "covergrid/output/report.hpp"

#include <fmt/format.h>

#include <filesystem>
#include <memory>

namespace covergrid::cli {

namespace {

struct ReportArgs {
  std::string cube, html;
  std::vector<std::int64_t> n;
  long max_bins = 80;
};

/// Without -o: <cube name without .h5>-report.html beside the cube.
std::string default_html_path(const std::string& cube) {
  std::filesystem::path p(cube);
  p.replace_extension();
  return p.string() + "-report.html";
}

int cmd_report(const ReportArgs& a, std::ostream& out) {
  const std::string target = a.html.empty() ? default_html_path(a.cube) : a.html;
  // Checked first: a page that cannot be written is bad input before any work.
  for (const std::string& problem : {engine::output_location_problem(target),
                                     engine::replacement_problem(target, {a.cube}, engine::Replaces::text)})
    if (!problem.empty()) throw InputError(a.html.empty() ? target : "-o " + target, problem);
  const output::CubeReader cube(a.cube);  // validates the layout (exit 2 naming the dataset)
  cube.require_whole();                   // a shard or an unfinished run would draw NaN
  cube.verify();                          // every chunk's checksum, also of datasets the page does not draw
  output::ReportOptions options;
  options.n = a.n;
  options.max_bins = static_cast<std::size_t>(a.max_bins);
  const std::string html = a.html.empty() ? default_html_path(a.cube) : a.html;
  output::write_report(cube, options, html);
  out << fmt::format("report: {} ({} bytes)\n", html, std::filesystem::file_size(html));
  return exit_ok;
}

}  // namespace

Command add_report_command(CLI::App& app) {
  auto a = std::make_shared<ReportArgs>();
  auto* report = app.add_subcommand("report", "A self-contained HTML page of plots and tables of a cube");
  report->add_option("CUBE", a->cube, "cube file (.h5), complete")->required();
  report->add_option("-o,--output", a->html,
                     "the HTML file to write (default: CUBE without .h5 + -report.html)");
  report
      ->add_option(
          "--n", a->n,
          "n values (on the cube's n axis) to draw against p and list in the summary, e.g. --n 10,20,40 "
          "(default: up to six spread over the axis)")
      ->delimiter(',');
  report
      ->add_option("--max-bins", a->max_bins,
                   "heat-map cells per axis (default 80); larger grids are binned down, each cell showing "
                   "the minimum coverage over its grid points")
      ->check(integer_in(10, 120))
      ->type_name("10..120");
  return {report, [a](std::ostream& out, std::ostream&) { return cmd_report(*a, out); }};
}

}  // namespace covergrid::cli
