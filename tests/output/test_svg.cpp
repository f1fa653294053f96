// The SVG writer: escaping (XML 1.0 character rules), exact number text that
// reads back bit for bit, scales and ticks, well-formed elements, text widths
// and the label placement (no label over another, a marker or an obstacle,
// none outside its bounds, on crowded and edge-hugging inputs).
// Sources of the expected values: the characters XML allows are those of
// XML 1.0 (Fifth Edition, W3C 2008), section 2.2 "Characters"; the UTF-8
// byte forms, overlong and surrogate rules are RFC 3629, sections 3 and 4;
// pixel positions are the linear (or logit) map of each test's stated domain
// onto its stated range, worked out by hand from those numbers.
#include "covergrid/output/svg.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <cstdlib>
#include <cstring>
#include <limits>
#include <random>
#include <string>
#include <utility>
#include <vector>

namespace svg = covergrid::output::svg;

TEST_CASE("escape makes text safe for XML", "[output][svg]") {
  CHECK(svg::escape("a<b & \"c\" 'd'>") == "a&lt;b &amp; &quot;c&quot; &#39;d&#39;&gt;");
  CHECK(svg::escape("tab\tnew\nline") == "tab\tnew\nline");
  // Controls XML 1.0 forbids become U+FFFD.
  CHECK(svg::escape(std::string("a\x01z", 3)) == "a\xEF\xBF\xBDz");
  CHECK(svg::escape(std::string("\0", 1)) == "\xEF\xBF\xBD");
  // Valid UTF-8 passes; broken sequences, overlong forms and surrogates do not.
  CHECK(svg::escape("p̂ ≤ 95 % − α") == "p̂ ≤ 95 % − α");
  CHECK(svg::escape("\xF0\x9F\x99\x82") == "\xF0\x9F\x99\x82");                  // U+1F642
  CHECK(svg::escape("x\xC3") == "x\xEF\xBF\xBD");                                // truncated
  CHECK(svg::escape("\xC0\xAF") == "\xEF\xBF\xBD\xEF\xBF\xBD");                  // overlong '/'
  CHECK(svg::escape("\xED\xA0\x80") == "\xEF\xBF\xBD\xEF\xBF\xBD\xEF\xBF\xBD");  // surrogate D800
  CHECK(svg::escape("\xEF\xBF\xBE") == "\xEF\xBF\xBD\xEF\xBF\xBD\xEF\xBF\xBD");  // U+FFFE
}

TEST_CASE("exact numbers read back as the same double", "[output][svg]") {
  std::mt19937_64 gen(7);
  std::uniform_real_distribution<double> u(0, 1);
  for (int i = 0; i < 2000; ++i) {
    const double v = i % 2 ? u(gen) : std::ldexp(u(gen), -i % 60);
    const std::string s = svg::exact(v);
    const double back = std::strtod(s.c_str(), nullptr);
    INFO(s);
    CHECK(std::memcmp(&back, &v, sizeof v) == 0);
  }
  CHECK(svg::exact(0.95) == "0.95");
  CHECK(svg::exact(std::numeric_limits<double>::quiet_NaN()) == "nan");
  CHECK(svg::exact(-std::numeric_limits<double>::infinity()) == "-inf");
  CHECK(svg::exact_list({0.5, 1, 0.125}) == "0.5 1 0.125");
  CHECK(svg::px(12.345) == "12.3");
  CHECK(svg::px(3.0) == "3");
  CHECK(svg::px(-0.01) == "0");
}

TEST_CASE("axes map data to pixels and choose readable ticks", "[output][svg]") {
  const svg::Axis x{0, 0.5, 100, 600, svg::Scale::linear};
  CHECK(x(0) == Approx(100));
  CHECK(x(0.25) == Approx(350));
  CHECK(x(0.5) == Approx(600));
  const auto ticks = x.ticks(48);
  REQUIRE(ticks.size() >= 5);
  for (std::size_t i = 1; i < ticks.size(); ++i)
    CHECK(x(ticks[i].value) - x(ticks[i - 1].value) >= 48 - 1e-9);
  CHECK(ticks.front().label == "0");
  CHECK(ticks.back().label == "0.50");  // labels share the step's decimals
  // A vertical axis grows upwards.
  const svg::Axis y{0.75, 1, 200, 20, svg::Scale::linear};
  CHECK(y(0.75) == Approx(200));
  CHECK(y(1) == Approx(20));
  // Logit: symmetric around one half; ticks from the probability ladder.
  const svg::Axis l{0.001, 0.999, 0, 600, svg::Scale::logit};
  CHECK(l(0.5) == Approx(300));
  CHECK(l(0.01) == Approx(600 - l(0.99)));
  bool has_half = false;
  for (const auto& t : l.ticks(40)) has_half |= t.label == "0.5";
  CHECK(has_half);
  // A short axis over nearly all of [0, 1] still gets ticks inside its range.
  const svg::Axis short_axis{0.0005, 0.9995, 0, 120, svg::Scale::linear};
  const auto few = short_axis.ticks(34);
  REQUIRE(few.size() >= 2);
  CHECK(few.front().label == "0.2");
  CHECK(few.back().label == "0.8");
  const auto [lo, hi] = svg::nice_range(0.231, 0.287, 6);
  CHECK(lo == Approx(0.23));
  CHECK(hi == Approx(0.29));
}

TEST_CASE("the evenest scale follows the grid's spacing", "[output][svg]") {
  std::vector<double> linear, logit, geometric;
  for (int i = 0; i < 50; ++i) {
    linear.push_back(0.01 + 0.02 * i);
    const double t = -4.9 + 0.2 * i;
    logit.push_back(1 / (1 + std::exp(-t)));
    geometric.push_back(5 * std::pow(1.1, i));
  }
  CHECK(svg::evenest_scale(linear, true) == svg::Scale::linear);
  CHECK(svg::evenest_scale(logit, true) == svg::Scale::logit);
  CHECK(svg::evenest_scale(geometric, false) == svg::Scale::log);
  CHECK(svg::evenest_scale(logit, false) == svg::Scale::linear);  // not probabilities: no logit
  CHECK(svg::evenest_scale({1, 2}, false) == svg::Scale::linear);
}

TEST_CASE("the canvas writes closed, escaped elements", "[output][svg]") {
  svg::Canvas c(200, 100, "a <title>", {{"class", "x"}});
  c.open("g", {{"data-method", "m<1>"}});
  c.text(1, 2, "p & q");
  c.polyline({0, 1.26}, {2, 3}, {{"data-values", "0.5 0.25"}});
  c.rect(0, 0, 10, 5);
  const std::string s = c.finish();
  CHECK(s.rfind("<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"200\" height=\"100\"", 0) == 0);
  CHECK(s.find("<title>a &lt;title&gt;</title>") != std::string::npos);
  CHECK(s.find("data-method=\"m&lt;1&gt;\"") != std::string::npos);
  CHECK(s.find(">p &amp; q</text>") != std::string::npos);
  CHECK(s.find("points=\"0,2 1.3,3\"") != std::string::npos);
  CHECK(s.find("<rect x=\"0\" y=\"0\" width=\"10\" height=\"5\"/>") != std::string::npos);
  CHECK(s.find("</g>\n</svg>") != std::string::npos);
}

TEST_CASE("text widths follow DejaVu Sans's advances", "[output][svg][labels]") {
  // DejaVu Sans 2.37 measured with FreeType through PIL 9.4 (Debian 12):
  // "clopper-pearson" at 11 px is 88.80 px, "m" 0.975 em, "i" 0.278 em.
  CHECK(svg::text_width("clopper-pearson", 11) >= 88.8);
  // The per-character sum leaves out kerning (PIL's whole-string 88.8 has it): 8.142 em.
  CHECK(svg::text_width("clopper-pearson", 11) == Approx(8.142 * 11 * 1.03 + 0.5));
  CHECK(svg::text_width("m", 10) > 2 * svg::text_width("i", 10) + 3);
  CHECK(svg::text_width("", 11) == Approx(0.5));
  // Any other character counts as 1 em, a UTF-8 sequence as one character.
  CHECK(svg::text_width("\xC3\xA9", 10) == Approx(10 * 1.03 + 0.5));
  CHECK(svg::text_width("\xE2\x88\x92x", 10) == Approx((10 + 5.92) * 1.03 + 0.5));
  const svg::Box b = svg::text_box(100, 50, "ab", 10, "end");
  CHECK(b.x1 == Approx(100 + 1.5));  // the bearing allowance, 0.15 em
  CHECK(b.x0 == Approx(100 - svg::text_width("ab", 10) - 1.5));
  CHECK(b.y0 == Approx(50 - 8.2));
  CHECK(b.y1 == Approx(52.7));
}

namespace {

/// Every label inside the bounds, clear of every other label, every marker
/// (its disc's square) and every obstacle; returns how many were displaced.
std::size_t check_placement(const std::vector<std::pair<double, double>>& points, double radius,
                            const std::vector<std::string>& labels, const svg::Box& bounds,
                            const std::vector<svg::Box>& obstacles = {}) {
  const auto spots = svg::place_labels(points, radius, labels, 11, bounds, obstacles);
  REQUIRE(spots.size() == points.size());
  std::size_t displaced = 0;
  for (std::size_t i = 0; i < spots.size(); ++i) {
    INFO("label " << i << " " << labels[i]);
    const auto& s = spots[i];
    CHECK(s.fits);
    // The box is the text's own box at the returned anchor.
    const svg::Box own = svg::text_box(s.x, s.baseline, labels[i], 11);
    CHECK(own.x0 == Approx(s.box.x0));
    CHECK(own.x1 == Approx(s.box.x1));
    CHECK(own.y0 == Approx(s.box.y0));
    CHECK(own.y1 == Approx(s.box.y1));
    CHECK(s.box.inside(bounds));
    for (std::size_t j = 0; j < spots.size(); ++j) {
      if (j != i) CHECK_FALSE(s.box.overlaps(spots[j].box));
      const svg::Box marker{points[j].first - radius, points[j].second - radius, points[j].first + radius,
                            points[j].second + radius};
      CHECK_FALSE(s.box.overlaps(marker));
    }
    for (const auto& o : obstacles) CHECK_FALSE(s.box.overlaps(o));
    if (s.displaced) ++displaced;
  }
  return displaced;
}

}  // namespace

TEST_CASE("labels are placed without collisions on adversarial inputs", "[output][svg][labels]") {
  const svg::Box bounds{80, 20, 1100, 380};
  SECTION("a lone point keeps its label beside it, right of it") {
    const auto spots = svg::place_labels({{500, 200}}, 4.5, {"wilson"}, 11, bounds);
    REQUIRE(spots.size() == 1);
    CHECK_FALSE(spots[0].displaced);
    CHECK(spots[0].box.x0 == Approx(500 + 7.5));
    CHECK(spots[0].x == Approx(500 + 7.5 + 0.15 * 11));
  }
  SECTION("sixteen methods at nearly the same point") {
    std::vector<std::pair<double, double>> points;
    std::vector<std::string> labels;
    for (int i = 0; i < 16; ++i) {
      points.emplace_back(600 + 0.3 * i, 200 - 0.2 * i);
      labels.emplace_back("method-number-");  // appended, not operator+ (GCC 12's false -Wrestrict)
      labels.back() += std::to_string(i);
    }
    const std::size_t displaced = check_placement(points, 4.5, labels, bounds);
    CHECK(displaced >= 8);  // at most eight places beside one point
  }
  SECTION("points at the right and top edges and in the corners") {
    const std::vector<std::pair<double, double>> points = {{1100, 200}, {1098, 204}, {1100, 20}, {80, 380},
                                                           {80, 20},    {1100, 380}, {590, 20}};
    const std::vector<std::string> labels = {
        "clopper-pearson", "likelihood-ratio", "agresti-coull", "wald", "wilson-cc", "mid-p", "jeffreys"};
    check_placement(points, 4.5, labels, bounds);
  }
  SECTION("a dense column of points beside an obstacle (the nominal label)") {
    std::vector<std::pair<double, double>> points;
    std::vector<std::string> labels;
    for (int i = 0; i < 10; ++i) {
      points.emplace_back(1090 - 2 * i, 60 + 4 * i);
      labels.emplace_back("m");
      labels.back() += std::to_string(i);
    }
    const std::vector<svg::Box> obstacles = {{1000, 50, 1100, 62}, {80, 99.5, 1100, 100.5}};
    check_placement(points, 4.5, labels, bounds, obstacles);
  }
  SECTION("the same input gives the same placement") {
    const std::vector<std::pair<double, double>> points = {{300, 300}, {301, 300}, {302, 301}};
    const std::vector<std::string> labels = {"a", "bb", "ccc"};
    const auto a = svg::place_labels(points, 4.5, labels, 11, bounds);
    const auto b = svg::place_labels(points, 4.5, labels, 11, bounds);
    for (std::size_t i = 0; i < a.size(); ++i) {
      CHECK(a[i].x == b[i].x);
      CHECK(a[i].baseline == b[i].baseline);
    }
  }
  SECTION("no room at all: the label stays within the bounds and says it does not fit") {
    const svg::Box tiny{0, 0, 30, 12};
    const auto spots = svg::place_labels({{15, 6}}, 4.5, {"a long label"}, 11, tiny);
    REQUIRE(spots.size() == 1);
    CHECK_FALSE(spots[0].fits);
    CHECK(spots[0].box.x0 >= 0);
    CHECK(spots[0].box.y0 >= 0);
  }
}
