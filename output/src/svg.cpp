#include "covergrid/output/svg.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <array>
#include <cmath>
#include <cstdint>

namespace covergrid::output::svg {

namespace {

constexpr std::string_view replacement = "\xEF\xBF\xBD";  // U+FFFD in UTF-8

/// Length of the valid UTF-8 sequence starting at s[i] that XML 1.0 allows,
/// or 0 when it is invalid (overlong, surrogate, beyond U+10FFFF, U+FFFE/F).
std::size_t utf8_sequence(std::string_view s, std::size_t i) {
  const auto b = [&](std::size_t k) { return static_cast<unsigned char>(s[k]); };
  const unsigned char lead = b(i);
  std::size_t len = 0;
  std::uint32_t cp = 0;
  if (lead >= 0xC2 && lead <= 0xDF) {
    len = 2;
    cp = lead & 0x1Fu;
  } else if (lead >= 0xE0 && lead <= 0xEF) {
    len = 3;
    cp = lead & 0x0Fu;
  } else if (lead >= 0xF0 && lead <= 0xF4) {
    len = 4;
    cp = lead & 0x07u;
  } else {
    return 0;
  }
  if (i + len > s.size()) return 0;
  for (std::size_t k = 1; k < len; ++k) {
    if ((b(i + k) & 0xC0u) != 0x80u) return 0;
    cp = (cp << 6) | (b(i + k) & 0x3Fu);
  }
  const std::uint32_t min_for_len[] = {0, 0, 0x80, 0x800, 0x10000};
  if (cp < min_for_len[len] || cp > 0x10FFFF) return 0;
  if (cp >= 0xD800 && cp <= 0xDFFF) return 0;
  if (cp == 0xFFFE || cp == 0xFFFF) return 0;
  return len;
}

double transform(Scale scale, double v) {
  switch (scale) {
    case Scale::log:
      return std::log10(v);
    case Scale::logit:
      return std::log(v / (1 - v));
    case Scale::linear:
      break;
  }
  return v;
}

/// The smallest of 1, 2, 5 times a power of ten that is at least `raw`.
double nice_step(double raw) {
  if (!(raw > 0) || !std::isfinite(raw)) return 1;
  const double power = std::pow(10.0, std::floor(std::log10(raw)));
  for (double f : {1.0, 2.0, 5.0, 10.0})
    if (f * power >= raw * (1 - 1e-12)) return f * power;
  return 10 * power;
}

/// Ratio of the largest to the smallest gap between consecutive transformed points.
double gap_ratio(const std::vector<double>& grid, Scale scale) {
  double lo = HUGE_VAL, hi = 0;
  for (std::size_t i = 1; i < grid.size(); ++i) {
    const double g = transform(scale, grid[i]) - transform(scale, grid[i - 1]);
    if (!(g > 0)) return HUGE_VAL;
    lo = std::min(lo, g);
    hi = std::max(hi, g);
  }
  return hi / lo;
}

std::string tick_label(double v, int decimals) {
  std::string s = fmt::format("{:.{}f}", v, std::max(0, decimals));
  if (s == "-0" || s.find_first_not_of("-0.") == std::string::npos) s = "0";
  return s;
}

}  // namespace

std::string escape(std::string_view text) {
  std::string out;
  out.reserve(text.size());
  for (std::size_t i = 0; i < text.size();) {
    const auto c = static_cast<unsigned char>(text[i]);
    if (c < 0x80) {
      switch (c) {
        case '&':
          out += "&amp;";
          break;
        case '<':
          out += "&lt;";
          break;
        case '>':
          out += "&gt;";
          break;
        case '"':
          out += "&quot;";
          break;
        case '\'':
          out += "&#39;";
          break;
        default:
          if (c >= 0x20 || c == '\t' || c == '\n' || c == '\r')
            out += static_cast<char>(c);
          else
            out += replacement;
      }
      ++i;
      continue;
    }
    const std::size_t len = utf8_sequence(text, i);
    if (len == 0) {
      out += replacement;
      ++i;
    } else {
      out.append(text.substr(i, len));
      i += len;
    }
  }
  return out;
}

std::string px(double v) {
  if (!std::isfinite(v)) return "0";
  std::string s = fmt::format("{:.1f}", v);
  while (s.back() == '0') s.pop_back();
  if (s.back() == '.') s.pop_back();
  if (s == "-0") s = "0";
  return s;
}

std::string exact(double v) {
  if (std::isnan(v)) return "nan";
  if (std::isinf(v)) return v > 0 ? "inf" : "-inf";
  return fmt::format("{}", v);
}

std::string exact_list(const std::vector<double>& values) {
  std::string out;
  for (std::size_t i = 0; i < values.size(); ++i) {
    if (i) out += ' ';
    out += exact(values[i]);
  }
  return out;
}

Scale evenest_scale(const std::vector<double>& grid, bool probabilities) {
  if (grid.size() < 3) return Scale::linear;
  const double linear = gap_ratio(grid, Scale::linear);
  if (linear < 3) return Scale::linear;
  const bool positive = grid.front() > 0;
  if (probabilities && positive && grid.back() < 1 && gap_ratio(grid, Scale::logit) < 1.5)
    return Scale::logit;
  if (positive && gap_ratio(grid, Scale::log) < 1.5) return Scale::log;
  return Scale::linear;
}

double Axis::operator()(double v) const {
  const double a = transform(scale, lo), b = transform(scale, hi);
  if (!(b > a) || !std::isfinite(a) || !std::isfinite(b)) return (from + to) / 2;
  return from + (transform(scale, v) - a) / (b - a) * (to - from);
}

std::pair<double, double> Axis::extent() const {
  const double dir = to >= from ? 1 : -1;
  const double a = from - dir * pad_lo, b = to + dir * pad_hi;
  return {std::min(a, b), std::max(a, b)};
}

std::vector<Tick> Axis::ticks(double min_gap) const {
  std::vector<Tick> out;
  const double span = std::fabs(to - from);
  if (!(hi > lo) || span <= 0) {
    out.push_back({lo, fmt::format("{:g}", lo)});
    return out;
  }
  if (scale == Scale::linear) {
    double step = nice_step((hi - lo) / std::max(1.0, std::floor(span / min_gap)));
    // A short axis whose nice step leaves fewer than two ticks inside takes
    // the next smaller step (e.g. 0.5 -> 0.2 on 0.0005..0.9995), if its ticks
    // stay 20 pixels apart.
    const auto inside = [&](double st) { return std::floor(hi / st + 1e-9) - std::ceil(lo / st - 1e-9) + 1; };
    if (inside(step) < 2) {
      const double mantissa = step / std::pow(10.0, std::floor(std::log10(step) + 1e-9));
      const double smaller = mantissa > 3 ? step * 0.4 : step / 2;  // 5 -> 2, 2 -> 1, 1 -> 0.5
      if (smaller * span / (hi - lo) >= 20) step = smaller;
    }
    const int decimals = static_cast<int>(std::ceil(-std::log10(step) - 1e-9));
    const double first = std::ceil(lo / step - 1e-9);
    for (double k = first; k * step <= hi * (1 + 1e-12) + 1e-12 * step; ++k)
      out.push_back({k * step, tick_label(k * step, decimals)});
    return out;
  }
  // Candidates in order of priority; each is kept if no kept tick is closer than min_gap.
  std::vector<double> candidates;
  if (scale == Scale::log) {
    const int k0 = static_cast<int>(std::floor(std::log10(lo))),
              k1 = static_cast<int>(std::ceil(std::log10(hi)));
    for (double f : {1.0, 2.0, 5.0})
      for (int k = k0; k <= k1; ++k) candidates.push_back(f * std::pow(10.0, k));
  } else {
    for (double v :
         {0.5, 0.1,  0.9,  0.01, 0.99, 0.001, 0.999, 1e-4, 0.9999, 1e-5,  0.99999, 1e-6,   0.999999, 0.2,
          0.8, 0.05, 0.95, 0.02, 0.98, 0.005, 0.995, 0.3,  0.7,    0.002, 0.998,   0.0005, 0.9995})
      candidates.push_back(v);
  }
  std::vector<double> kept;
  for (double v : candidates) {
    if (v < lo * (1 - 1e-12) || v > hi * (1 + 1e-12)) continue;
    const double at = (*this)(v);
    if (std::all_of(kept.begin(), kept.end(), [&](double k) { return std::fabs((*this)(k)-at) >= min_gap; }))
      kept.push_back(v);
  }
  std::sort(kept.begin(), kept.end());
  for (double v : kept) out.push_back({v, fmt::format("{:g}", v)});
  return out;
}

std::pair<double, double> nice_range(double lo, double hi, int count) {
  if (!(hi > lo)) {
    const double pad = lo != 0 ? std::fabs(lo) * 0.1 : 1;
    return {lo - pad, hi + pad};
  }
  const double step = nice_step((hi - lo) / std::max(1, count));
  return {std::floor(lo / step + 1e-9) * step, std::ceil(hi / step - 1e-9) * step};
}

namespace {

// Advance widths of the printable ASCII characters (32..126) in DejaVu Sans,
// in 1/1000 em, rounded up: measured with FreeType through PIL 9.4
// (ImageFont.truetype("DejaVuSans.ttf", 1000).getlength) on Debian 12's
// fonts-dejavu-core 2.37.
constexpr std::array<std::uint16_t, 95> dejavu_advance = {
    318, 401, 460, 838, 637, 951, 780, 275, 391, 391, 500, 838, 318, 361,  318, 337, 637, 637, 637,
    637, 637, 637, 637, 637, 637, 637, 337, 337, 838, 838, 838, 531, 1000, 685, 687, 699, 771, 632,
    576, 775, 752, 295, 295, 656, 558, 863, 749, 788, 604, 788, 695, 635,  611, 732, 685, 989, 686,
    611, 686, 391, 337, 391, 838, 500, 500, 613, 635, 550, 635, 616, 353,  635, 634, 278, 278, 580,
    278, 975, 634, 612, 635, 635, 412, 521, 393, 634, 592, 818, 592, 592,  525, 637, 337, 637, 838};

/// The part of segment (a, b) inside box `box` is not empty (Liang-Barsky clipping).
bool segment_hits(double ax, double ay, double bx, double by, const Box& box) {
  double t0 = 0, t1 = 1;
  const double dx = bx - ax, dy = by - ay;
  const double p[4] = {-dx, dx, -dy, dy};
  const double q[4] = {ax - box.x0, box.x1 - ax, ay - box.y0, box.y1 - ay};
  for (int i = 0; i < 4; ++i) {
    if (p[i] == 0) {
      if (q[i] <= 0) return false;
      continue;
    }
    const double t = q[i] / p[i];
    if (p[i] < 0)
      t0 = std::max(t0, t);
    else
      t1 = std::min(t1, t);
    if (t0 >= t1) return false;
  }
  return true;
}

/// The point of `box` nearest to (x, y).
std::pair<double, double> nearest_on(const Box& box, double x, double y) {
  return {std::clamp(x, box.x0, box.x1), std::clamp(y, box.y0, box.y1)};
}

}  // namespace

double text_width(std::string_view text, double font_px) {
  double em = 0;
  for (std::size_t i = 0; i < text.size();) {
    const auto c = static_cast<unsigned char>(text[i]);
    if (c >= 32 && c < 127) {
      em += dejavu_advance[c - 32] / 1000.0;
      ++i;
      continue;
    }
    // One character of any other kind (a UTF-8 sequence, or a stray byte that
    // escape() turns into U+FFFD): 1 em.
    em += 1;
    std::size_t len = 1;
    if (c >= 0xC0 && c < 0xE0)
      len = 2;
    else if (c >= 0xE0 && c < 0xF0)
      len = 3;
    else if (c >= 0xF0)
      len = 4;
    i += std::min(len, text.size() - i);
  }
  return em * font_px * 1.03 + 0.5;
}

bool Box::overlaps(const Box& o) const { return x0 < o.x1 && o.x0 < x1 && y0 < o.y1 && o.y0 < y1; }

bool Box::inside(const Box& o) const { return x0 >= o.x0 && x1 <= o.x1 && y0 >= o.y0 && y1 <= o.y1; }

Box text_box(double x, double baseline, std::string_view text, double font_px, std::string_view anchor) {
  const double w = text_width(text, font_px);
  const double x0 = anchor == "middle" ? x - w / 2 : anchor == "end" ? x - w : x;
  const double bearing = text_bearing * font_px;
  return {x0 - bearing, baseline - text_ascent * font_px, x0 + w + bearing,
          baseline + text_descent * font_px};
}

std::vector<LabelPlacement> place_labels(const std::vector<std::pair<double, double>>& points, double radius,
                                         const std::vector<std::string>& labels, double font_px,
                                         const Box& bounds, const std::vector<Box>& obstacles) {
  const std::size_t count = std::min(points.size(), labels.size());
  std::vector<Box> markers;
  for (std::size_t i = 0; i < count; ++i) {
    const auto [x, y] = points[i];
    markers.push_back({x - radius - 1, y - radius - 1, x + radius + 1, y + radius + 1});
  }
  // The most crowded points first (most other markers within 60 pixels), ties in input order.
  std::vector<std::size_t> order(count);
  std::vector<int> crowd(count, 0);
  for (std::size_t i = 0; i < count; ++i) {
    order[i] = i;
    for (std::size_t j = 0; j < count; ++j)
      if (j != i && std::hypot(points[i].first - points[j].first, points[i].second - points[j].second) < 60)
        ++crowd[i];
  }
  std::stable_sort(order.begin(), order.end(),
                   [&](std::size_t a, std::size_t b) { return crowd[a] > crowd[b]; });

  const double ascent = text_ascent * font_px, descent = text_descent * font_px, gap = radius + 3;
  std::vector<LabelPlacement> out(count);
  std::vector<Box> placed;
  for (std::size_t i : order) {
    const auto [cx, cy] = points[i];
    const Box own = text_box(0, 0, labels[i], font_px);
    const double w = own.x1 - own.x0, h = ascent + descent, inset = -own.x0;
    const auto box_at = [&](double x0, double y0) { return Box{x0, y0, x0 + w, y0 + h}; };
    const auto free = [&](const Box& b) {
      if (!b.inside(bounds)) return false;
      // A pixel of clearance, so that coordinates rounded to a tenth stay apart.
      const Box padded{b.x0 - 1, b.y0 - 1, b.x1 + 1, b.y1 + 1};
      const auto hits = [&](const Box& o) { return padded.overlaps(o); };
      return std::none_of(placed.begin(), placed.end(), hits) &&
             std::none_of(markers.begin(), markers.end(), hits) &&
             std::none_of(obstacles.begin(), obstacles.end(), hits);
    };
    const auto finish = [&](const Box& b, bool displaced, bool fits) {
      out[i] = {b.x0 + inset, b.y0 + ascent, b, displaced, fits};
      placed.push_back(b);
    };
    const double d = gap * 0.7071;
    const Box beside[] = {box_at(cx + gap, cy - h / 2),     box_at(cx - gap - w, cy - h / 2),
                          box_at(cx + d, cy - d - h),       box_at(cx - d - w, cy - d - h),
                          box_at(cx + d, cy + d),           box_at(cx - d - w, cy + d),
                          box_at(cx - w / 2, cy - gap - h), box_at(cx - w / 2, cy + gap)};
    const Box* chosen = nullptr;
    for (const Box& b : beside)
      if (free(b)) {
        chosen = &b;
        break;
      }
    if (chosen) {
      finish(*chosen, false, true);
      continue;
    }
    // Displaced: the free grid place nearest to the point, a clear leader line preferred.
    struct Candidate {
      double distance;
      Box box;
    };
    std::vector<Candidate> grid;
    for (double y0 = bounds.y0; y0 + h <= bounds.y1; y0 += 3)
      for (double x0 = bounds.x0; x0 + w <= bounds.x1; x0 += 3) {
        const Box b = box_at(x0, y0);
        const auto [nx, ny] = nearest_on(b, cx, cy);
        grid.push_back({std::hypot(nx - cx, ny - cy), b});
      }
    std::stable_sort(grid.begin(), grid.end(),
                     [](const Candidate& a, const Candidate& b) { return a.distance < b.distance; });
    const Box* any_free = nullptr;
    for (const auto& c : grid) {
      if (!free(c.box)) continue;
      if (!any_free) any_free = &c.box;
      const auto [nx, ny] = nearest_on(c.box, cx, cy);
      bool clear = true;
      for (const Box& b : placed) clear = clear && !segment_hits(cx, cy, nx, ny, b);
      for (std::size_t j = 0; j < count && clear; ++j)
        if (j != i) clear = !segment_hits(cx, cy, nx, ny, markers[j]);
      if (clear) {
        chosen = &c.box;
        break;
      }
    }
    if (!chosen) chosen = any_free;
    if (chosen)
      finish(*chosen, true, true);
    else  // no free place: beside the point, kept within the bounds
      finish(box_at(std::clamp(beside[0].x0, bounds.x0, std::max(bounds.x0, bounds.x1 - w)),
                    std::clamp(beside[0].y0, bounds.y0, std::max(bounds.y0, bounds.y1 - h))),
             false, false);
  }
  return out;
}

Canvas::Canvas(double width, double height, std::string_view label, const Attrs& attrs) {
  out_ = fmt::format(
      "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"{0}\" height=\"{1}\" viewBox=\"0 0 {0} {1}\" "
      "role=\"img\" aria-label=\"{2}\"",
      px(width), px(height), escape(label));
  for (const auto& [k, v] : attrs) out_ += fmt::format(" {}=\"{}\"", k, escape(v));
  out_ += fmt::format("><title>{}</title>\n", escape(label));
  open_.push_back("svg");
}

void Canvas::open(std::string_view tag, const Attrs& attrs) {
  out_ += '<';
  out_ += tag;
  for (const auto& [k, v] : attrs) out_ += fmt::format(" {}=\"{}\"", k, escape(v));
  out_ += ">";
  if (tag != "text" && tag != "tspan") out_ += '\n';
  open_.emplace_back(tag);
}

void Canvas::close() {
  if (open_.empty()) return;
  out_ += "</" + open_.back() + ">\n";
  open_.pop_back();
}

void Canvas::element(std::string_view tag, const Attrs& attrs) {
  out_ += '<';
  out_ += tag;
  for (const auto& [k, v] : attrs) out_ += fmt::format(" {}=\"{}\"", k, escape(v));
  out_ += "/>\n";
}

void Canvas::text(double x, double y, std::string_view content, const Attrs& attrs) {
  Attrs all = {{"x", px(x)}, {"y", px(y)}};
  all.insert(all.end(), attrs.begin(), attrs.end());
  out_ += "<text";
  for (const auto& [k, v] : all) out_ += fmt::format(" {}=\"{}\"", k, escape(v));
  out_ += ">" + escape(content) + "</text>\n";
}

void Canvas::rect(double x, double y, double w, double h, const Attrs& attrs) {
  Attrs all = {{"x", px(x)}, {"y", px(y)}, {"width", px(w)}, {"height", px(h)}};
  all.insert(all.end(), attrs.begin(), attrs.end());
  element("rect", all);
}

void Canvas::line(double x1, double y1, double x2, double y2, const Attrs& attrs) {
  Attrs all = {{"x1", px(x1)}, {"y1", px(y1)}, {"x2", px(x2)}, {"y2", px(y2)}};
  all.insert(all.end(), attrs.begin(), attrs.end());
  element("line", all);
}

namespace {
std::string point_list(const std::vector<double>& x, const std::vector<double>& y) {
  std::string pts;
  const std::size_t count = std::min(x.size(), y.size());
  pts.reserve(count * 12);
  for (std::size_t i = 0; i < count; ++i) {
    if (i) pts += ' ';
    pts += px(x[i]);
    pts += ',';
    pts += px(y[i]);
  }
  return pts;
}
}  // namespace

void Canvas::polyline(const std::vector<double>& x, const std::vector<double>& y, const Attrs& attrs) {
  Attrs all = {{"points", point_list(x, y)}, {"fill", "none"}};
  all.insert(all.end(), attrs.begin(), attrs.end());
  element("polyline", all);
}

void Canvas::polygon(const std::vector<double>& x, const std::vector<double>& y, const Attrs& attrs) {
  Attrs all = {{"points", point_list(x, y)}};
  all.insert(all.end(), attrs.begin(), attrs.end());
  element("polygon", all);
}

void Canvas::axes(const Axis& x, const Axis& y, std::string_view x_title, std::string_view y_title,
                  bool grid_lines, bool x_tick_labels) {
  const auto [left, right] = x.extent();
  const auto [top, bottom] = y.extent();
  // Ticks at least 48 (x) and 22 (y) pixels apart, and at least three on a short axis.
  const double x_gap = std::min(48.0, (right - left) / 3.5), y_gap = std::min(22.0, (bottom - top) / 3.5);
  open("g", {{"class", "axes"}});
  for (const auto& t : x.ticks(x_gap)) {
    const double at = x(t.value);
    if (grid_lines) line(at, top, at, bottom, {{"class", "grid"}});
    line(at, bottom, at, bottom + 4, {{"class", "tick"}});
    if (x_tick_labels) text(at, bottom + 15, t.label, {{"class", "tick-label"}, {"text-anchor", "middle"}});
  }
  for (const auto& t : y.ticks(y_gap)) {
    const double at = y(t.value);
    if (grid_lines) line(left, at, right, at, {{"class", "grid"}});
    line(left - 4, at, left, at, {{"class", "tick"}});
    text(left - 6, at + 4, t.label, {{"class", "tick-label"}, {"text-anchor", "end"}});
  }
  rect(left, top, right - left, bottom - top, {{"class", "frame"}});
  if (!x_title.empty())
    text((left + right) / 2, bottom + 30, x_title, {{"class", "axis-title"}, {"text-anchor", "middle"}});
  if (!y_title.empty()) {
    const double cx = left - 40, cy = (top + bottom) / 2;
    text(cx, cy, y_title,
         {{"class", "axis-title"},
          {"text-anchor", "middle"},
          {"transform", fmt::format("rotate(-90 {} {})", px(cx), px(cy))}});
  }
  close();
}

void Canvas::open_plot_area(const Axis& x, const Axis& y, const Attrs& attrs) {
  const auto [left, right] = x.extent();
  const auto [top, bottom] = y.extent();
  Attrs all = {{"x", px(left)},
               {"y", px(top)},
               {"width", px(right - left)},
               {"height", px(bottom - top)},
               {"viewBox", fmt::format("{} {} {} {}", px(left), px(top), px(right - left), px(bottom - top))},
               {"overflow", "hidden"}};
  all.insert(all.end(), attrs.begin(), attrs.end());
  open("svg", all);
}

std::string Canvas::finish() {
  while (!open_.empty()) close();
  return std::move(out_);
}

}  // namespace covergrid::output::svg
