#include "covergrid/output/svg.hpp"

#include <fmt/format.h>

#include <algorithm>
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
                  bool grid_lines) {
  const auto [left, right] = x.extent();
  const auto [top, bottom] = y.extent();
  // Ticks at least 48 (x) and 22 (y) pixels apart, and at least three on a short axis.
  const double x_gap = std::min(48.0, (right - left) / 3.5), y_gap = std::min(22.0, (bottom - top) / 3.5);
  open("g", {{"class", "axes"}});
  for (const auto& t : x.ticks(x_gap)) {
    const double at = x(t.value);
    if (grid_lines) line(at, top, at, bottom, {{"class", "grid"}});
    line(at, bottom, at, bottom + 4, {{"class", "tick"}});
    text(at, bottom + 14, t.label, {{"class", "tick-label"}, {"text-anchor", "middle"}});
  }
  for (const auto& t : y.ticks(y_gap)) {
    const double at = y(t.value);
    if (grid_lines) line(left, at, right, at, {{"class", "grid"}});
    line(left - 4, at, left, at, {{"class", "tick"}});
    text(left - 6, at + 3.5, t.label, {{"class", "tick-label"}, {"text-anchor", "end"}});
  }
  rect(left, top, right - left, bottom - top, {{"class", "frame"}});
  if (!x_title.empty())
    text((left + right) / 2, bottom + 28, x_title, {{"class", "axis-title"}, {"text-anchor", "middle"}});
  if (!y_title.empty()) {
    const double cx = left - 34, cy = (top + bottom) / 2;
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
