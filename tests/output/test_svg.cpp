// The SVG writer: escaping (XML 1.0 character rules), exact number text that
// reads back bit for bit, scales and ticks, and well-formed elements.
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
