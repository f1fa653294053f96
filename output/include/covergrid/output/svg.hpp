#pragma once
/// A small SVG writer of our own for the report: escaped text, scales from
/// data to pixels with tick choice, and a canvas that writes XML-compatible
/// elements (every element closed, every attribute value escaped), so the
/// page it lands in parses as XHTML as well as HTML.
///
/// Plot areas are nested <svg> viewports: a nested viewport clips what it
/// holds, so curves that leave an axis range are cut at the frame without
/// clip-path references.
#include <cstddef>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

namespace covergrid::output::svg {

/// Text made safe for XML character data and attribute values: & < > " '
/// become entities; characters XML 1.0 forbids (C0 controls other than tab,
/// newline, carriage return) and bytes that are not valid UTF-8 become
/// U+FFFD.
std::string escape(std::string_view text);

/// A pixel coordinate: at most one decimal (a tenth of a pixel), trailing zeros dropped.
std::string px(double v);

/// A double in the shortest form that reads back as the same double
/// ("nan", "inf", "-inf" when not finite).
std::string exact(double v);

/// Values joined by single spaces, each in exact() form.
std::string exact_list(const std::vector<double>& values);

using Attrs = std::vector<std::pair<std::string, std::string>>;

enum class Scale { linear, log, logit };

/// The scale that spreads a grid's points most evenly: logit for a p grid
/// equally spaced in log-odds, log for an n grid equally spaced in log,
/// linear otherwise (and always for fewer than three points).
Scale evenest_scale(const std::vector<double>& grid, bool probabilities);

struct Tick {
  double value;
  std::string label;
};

/// A map from a data range [lo, hi] to a pixel range [from, to] (to < from
/// for a vertical axis, so that values grow upwards).
struct Axis {
  double lo = 0, hi = 1;
  double from = 0, to = 1;
  Scale scale = Scale::linear;
  /// Pixels the frame reaches beyond the lo and the hi end (cells centred on
  /// the first and last grid value reach half a cell further).
  double pad_lo = 0, pad_hi = 0;

  double operator()(double v) const;
  /// The frame's pixel extent [min, max] along this axis, padding included.
  std::pair<double, double> extent() const;
  /// Tick positions with labels: "nice" steps (1, 2, 5 times a power of ten)
  /// for a linear scale, powers of ten (and 2, 5 times them when few) for
  /// log, a fixed ladder of probabilities for logit; never closer than
  /// `min_gap` pixels.
  std::vector<Tick> ticks(double min_gap) const;
};

/// Round [lo, hi] outwards to multiples of a nice step, about `count` steps.
std::pair<double, double> nice_range(double lo, double hi, int count);

/// Estimated advance width in pixels of one line of `text` at `font_px`, for
/// the page's first font, DejaVu Sans: each printable ASCII character's
/// advance (DejaVu Sans 2.37 as measured by FreeType through PIL 9.4,
/// Debian 12, rounded up to 1/1000 em), 1 em for any other character
/// (wider than almost every glyph), times 1.03 (Chromium 156 lays 11-pixel
/// DejaVu Sans out up to 2.5 % wider than the unhinted advances), plus half
/// a pixel. The fallback fonts of the style sheet are narrower, so the
/// estimate errs wide; tests/output/check_report.py measures every label of
/// a page with FreeType, and scripts/check-report-render with Chromium's
/// layout, and both check that it does.
double text_width(std::string_view text, double font_px);

/// An axis-aligned box in page pixels, x0 <= x1 and y0 <= y1.
struct Box {
  double x0 = 0, y0 = 0, x1 = 0, y1 = 0;
  /// True when the interiors intersect (boxes that only touch do not).
  bool overlaps(const Box& other) const;
  /// True when this box lies wholly within `outer` (edges may coincide).
  bool inside(const Box& outer) const;
};

/// Ascent and descent of a text line as fractions of the font size (DejaVu
/// Sans glyphs reach 0.76 em above and 0.24 em below the baseline; rounded up).
inline constexpr double text_ascent = 0.82, text_descent = 0.27;
/// Glyphs may reach this far (a fraction of the font size) beyond their
/// advances on either side (the hook of a leading "j"; Chromium's getBBox()
/// found 1.5 pixels at 11 px).
inline constexpr double text_bearing = 0.15;

/// The box of one line of text anchored at (x, baseline): `anchor` is
/// "start", "middle" or "end" as SVG's text-anchor; the advance width,
/// widened by text_bearing on each side.
Box text_box(double x, double baseline, std::string_view text, double font_px,
             std::string_view anchor = "start");

/// Where a label went: start-anchored at x with its baseline at `baseline`,
/// its box, and whether it was displaced from beside its point (then a
/// leader line joins them). `fits` is false only when no free place was left
/// in the bounds; the label then sits beside its point and may overlap.
struct LabelPlacement {
  double x = 0, baseline = 0;
  Box box;
  bool displaced = false;
  bool fits = true;
};

/// Greedy label placement for point markers of radius `radius` at `points`:
/// the labels of the most crowded points first, each at the first free place
/// among eight positions beside its point (right, left, the four diagonals,
/// above, below), else at the free place nearest to its point on a 3-pixel
/// grid over `bounds` (preferring one whose leader line crosses no other
/// label or marker). A free place lies inside `bounds` and overlaps no
/// placed label, no marker (a square of side 2 radius + 2 around each
/// point) and no box of `obstacles`. A pure function of its arguments.
std::vector<LabelPlacement> place_labels(const std::vector<std::pair<double, double>>& points, double radius,
                                         const std::vector<std::string>& labels, double font_px,
                                         const Box& bounds, const std::vector<Box>& obstacles = {});

/// One <svg> element under construction.
class Canvas {
 public:
  /// `label` becomes the <title> (read out by screen readers, shown as a tooltip).
  Canvas(double width, double height, std::string_view label, const Attrs& attrs = {});

  /// Opens an element that will hold others (g, svg, text with tspans); close() ends it.
  void open(std::string_view tag, const Attrs& attrs = {});
  void close();
  /// An element without children, self-closed.
  void element(std::string_view tag, const Attrs& attrs);
  void text(double x, double y, std::string_view content, const Attrs& attrs = {});
  void rect(double x, double y, double w, double h, const Attrs& attrs = {});
  void line(double x1, double y1, double x2, double y2, const Attrs& attrs = {});
  /// A polyline through (x[i], y[i]); extra attributes carry the data.
  void polyline(const std::vector<double>& x, const std::vector<double>& y, const Attrs& attrs = {});
  /// A closed polygon (e.g. a band between two curves).
  void polygon(const std::vector<double>& x, const std::vector<double>& y, const Attrs& attrs = {});

  /// A frame for the plot area x.from..x.to by y.to..y.from with ticks, tick
  /// labels, light grid lines at the ticks (unless grid_lines is false) and
  /// axis titles (an empty title is left out); without x_tick_labels the x
  /// ticks are drawn unlabelled (for a panel above another on the same x).
  void axes(const Axis& x, const Axis& y, std::string_view x_title, std::string_view y_title,
            bool grid_lines = true, bool x_tick_labels = true);
  /// Opens a nested viewport over the plot area of (x, y) whose user
  /// coordinates are the page's own; close() ends it.
  void open_plot_area(const Axis& x, const Axis& y, const Attrs& attrs = {});

  /// The finished element (closing whatever is still open).
  std::string finish();

 private:
  std::string out_;
  std::vector<std::string> open_;
};

}  // namespace covergrid::output::svg
