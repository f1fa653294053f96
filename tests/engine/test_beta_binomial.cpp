// The beta-binomial (clustered) model: its window at icc = 0 against the
// binomial's, its cluster law against Boost.Math's Beta functions, its sum of
// clusters against a direct convolution and against simulation of the
// generative story (chi-square at a fixed seed), and the coverage of methods
// that ignore the clustering falling as icc grows.
#include "covergrid/engine/binomial_window.hpp"
#include "covergrid/engine/exact.hpp"
#include "covergrid/engine/interval_table.hpp"
#include "covergrid/engine/sampling_model.hpp"
#include "covergrid/methods/registry.hpp"

#include <boost/math/distributions/chi_squared.hpp>
#include <boost/math/special_functions/beta.hpp>
#include <boost/math/special_functions/binomial.hpp>
#include <catch2/catch.hpp>

#include <cmath>
#include <random>
#include <vector>

namespace e = covergrid::engine;
namespace m = covergrid::methods;

namespace {

std::shared_ptr<const e::SamplingModel> clustered(double k, double icc) {
  return e::make_model("beta-binomial", {{"cluster_size", k}, {"icc", icc}});
}

/// P(Y = y) for one cluster, from the Beta-function form
/// C(k, y) B(y + a, k - y + b) / B(a, b) (Boost.Math 1.74).
std::vector<double> cluster_by_beta(int k, double p, double icc) {
  const double a = p * (1 - icc) / icc, b = (1 - p) * (1 - icc) / icc;
  std::vector<double> f(static_cast<std::size_t>(k) + 1);
  for (int y = 0; y <= k; ++y)
    f[static_cast<std::size_t>(y)] =
        boost::math::binomial_coefficient<double>(static_cast<unsigned>(k), static_cast<unsigned>(y)) *
        boost::math::beta(y + a, k - y + b) / boost::math::beta(a, b);
  return f;
}

}  // namespace

TEST_CASE("the beta-binomial model is registered, labelled and checks its parameters", "[engine][model]") {
  const auto model = clustered(20, 0.05);
  CHECK(model->kind() == "beta-binomial");
  CHECK(model->label() == "beta-binomial(k=20,icc=0.05)");
  CHECK(model->design().cluster_size == 20);
  CHECK(model->refuses(60).empty());
  CHECK(model->refuses(50).find("not a multiple of the cluster size k = 20") != std::string::npos);
  CHECK_FALSE(model->unimodal_runs());
  CHECK_THROWS_AS(e::make_model("beta-binomial", {{"icc", 0.1}}), m::ParameterError);
  CHECK_THROWS_AS(e::make_model("beta-binomial", {{"cluster_size", 2.5}}), m::ParameterError);
  CHECK_THROWS_AS(e::make_model("beta-binomial", {{"cluster_size", 4.0}, {"icc", 1.0}}), m::ParameterError);
  CHECK_THROWS_AS(e::make_model("beta-binomial", {{"cluster_size", 4.0}, {"icc", -0.1}}), m::ParameterError);
}

TEST_CASE("at icc = 0 the clustered model is the binomial to 1e-12", "[engine][model]") {
  for (int k : {1, 5, 20})
    for (int n : {20, 100, 400}) {
      const auto model = clustered(k, 0.0);
      for (double p : {0.0, 0.002, 0.3, 0.5, 0.97, 1.0}) {
        e::ProbabilityWindow w;
        model->window(n, p, w);
        e::BinomialWindow b;
        b.fill(n, p);
        INFO("k = " << k << " n = " << n << " p = " << p);
        for (int x = 0; x <= n; ++x) {
          const double got = x < w.lo || x > w.hi ? 0.0 : w.w[static_cast<std::size_t>(x - w.lo)];
          const double want = x < b.lo || x > b.hi ? 0.0 : b.w[static_cast<std::size_t>(x - b.lo)];
          CHECK(std::fabs(got - want) <= 1e-12);
        }
      }
    }
}

TEST_CASE("the clustered law sums to one and equals a direct convolution of Beta-function laws",
          "[engine][model]") {
  for (double icc : {0.01, 0.2, 0.8})  // 0.8: a U-shaped cluster law
    for (double p : {0.03, 0.4}) {
      const int k = 4;
      const auto f = cluster_by_beta(k, p, icc);
      // Three clusters, convolved by hand.
      std::vector<double> g(3 * k + 1, 0.0);
      for (int a = 0; a <= k; ++a)
        for (int b = 0; b <= k; ++b)
          for (int c = 0; c <= k; ++c)
            g[static_cast<std::size_t>(a + b + c)] += f[static_cast<std::size_t>(a)] *
                                                      f[static_cast<std::size_t>(b)] *
                                                      f[static_cast<std::size_t>(c)];
      const auto model = clustered(k, icc);
      e::ProbabilityWindow w;
      model->window(3 * k, p, w);
      INFO("icc = " << icc << " p = " << p);
      CHECK(w.cum.back() == Approx(1.0).margin(1e-14));
      CHECK(w.tail_bound <= 1e-15);
      for (int x = 0; x <= 3 * k; ++x) {
        const double got = x < w.lo || x > w.hi ? 0.0 : w.w[static_cast<std::size_t>(x - w.lo)];
        CHECK(got == Approx(g[static_cast<std::size_t>(x)]).epsilon(1e-12).margin(1e-16));
      }
    }
}

TEST_CASE("the clustered law matches simulation of clusters (chi-square, fixed seed)", "[engine][model]") {
  // Draw 20000 samples of 8 clusters of 10 by the model's story: each
  // cluster's p from Beta(a, b) (as G1 / (G1 + G2) of two gammas), its count
  // Bin(10, p_i). The chi-square statistic over bins pooled to an expected
  // count of at least 5 must stay below its 0.999 quantile (Boost.Math); at
  // this fixed seed the test cannot flake, and a wrong law (say the
  // binomial, whose variance is 2.35 times smaller here) fails it by far.
  const int k = 10, m = 8, n = k * m, draws = 20000;
  const double p = 0.3, icc = 0.15;
  const double a = p * (1 - icc) / icc, b = (1 - p) * (1 - icc) / icc;
  std::mt19937_64 rng(20261203);
  std::gamma_distribution<double> ga(a, 1.0), gb(b, 1.0);
  std::vector<double> seen(static_cast<std::size_t>(n) + 1, 0.0);
  for (int d = 0; d < draws; ++d) {
    int x = 0;
    for (int c = 0; c < m; ++c) {
      const double u = ga(rng), v = gb(rng);
      std::binomial_distribution<int> count(k, u / (u + v));
      x += count(rng);
    }
    seen[static_cast<std::size_t>(x)] += 1;
  }
  for (const auto& model : {clustered(k, icc), clustered(k, 0.0)}) {
    double chi2 = 0, expected_bin = 0, seen_bin = 0;
    int bins = 0;
    for (int x = 0; x <= n; ++x) {
      expected_bin += draws * model->pmf(x, n, p);
      seen_bin += seen[static_cast<std::size_t>(x)];
      if (expected_bin >= 5 || x == n) {
        chi2 += (seen_bin - expected_bin) * (seen_bin - expected_bin) / std::max(expected_bin, 1e-300);
        ++bins;
        expected_bin = seen_bin = 0;
      }
    }
    const double limit = boost::math::quantile(boost::math::chi_squared(bins - 1), 0.999);
    INFO(model->label() << ": chi-square " << chi2 << " on " << bins - 1 << " degrees of freedom, limit "
                        << limit);
    if (model->label().find("icc=0.15") != std::string::npos)
      CHECK(chi2 < limit);
    else
      CHECK(chi2 > 10 * limit);  // the binomial is not this law
  }
}

TEST_CASE("methods that ignore clustering lose coverage as icc grows", "[engine][model]") {
  // Exact mean coverage over p in [0.05, 0.95] at n = 60 in clusters of 10:
  // strictly falling in icc for Wald, Wilson and Clopper-Pearson.
  for (const char* id : {"wald", "wilson", "clopper-pearson"}) {
    const auto method = m::make_instance(id, {});
    const auto t = e::build_table(*method.method, 60, 0.95, m::Side::two_sided);
    double last = 2;
    for (double icc : {0.0, 0.02, 0.1, 0.3}) {
      const auto model = clustered(10, icc);
      const double mean = e::coverage_uniform_mean(t, 0.05, 0.95, *model);
      INFO(id << " icc = " << icc << " mean coverage " << mean);
      CHECK(mean < last);
      last = mean;
    }
    CHECK(last < 0.8);  // at icc = 0.3 the design effect is 3.7
  }
}

TEST_CASE("the clustered model's worst case is searched densely and flagged", "[engine][model]") {
  const auto method = m::make_instance("wilson", {});
  const auto t = e::build_table(*method.method, 40, 0.95, m::Side::two_sided);
  const auto model = clustered(5, 0.05);
  const auto inf = e::coverage_infimum(t, 0.1, 0.9, -HUGE_VAL, *model);
  CHECK(inf.refined);
  // Below every grid value of the range.
  for (int i = 0; i <= 80; ++i) {
    const double p = 0.1 + 0.8 * i / 80;
    e::ProbabilityWindow w;
    model->window(40, p, w);
    CHECK(inf.value <= e::exact_metrics(t, w, p)[e::index(e::Metric::coverage)] + 1e-12);
  }
}
