// deff-wilson, deff-clopper-pearson, deff-jeffreys — intervals for a
// clustered sample on effective counts: the sample of n = m k units in m
// clusters of k carries about as much information as a simple random sample
// of n* = n / deff units, where deff is the design effect (Kish 1965, Survey
// Sampling, Wiley, sec. 8.2). Each method estimates deff from the sample's
// own between-cluster variation and applies a one-sample form to
// (x*, n*) = (p^ n*, n*) — Wilson's score interval, the Clopper-Pearson
// Beta quantiles as proposed for survey data by Korn & Graubard (1998),
// Survey Methodology 24:193-201, or the Jeffreys Beta(x* + 1/2, n* - x* + 1/2)
// quantiles.
//
// The estimate (equal cluster sizes, clusters treated as drawn with
// replacement, the usual "ultimate cluster" variance):
//   p_i = y_i / k,   v = sum_i (p_i - p^)^2 / (m (m - 1)),   n* = p^ (1 - p^) / v,
// so deff^ = n v / (p^ (1 - p^)). The sum of squares is taken from the
// cluster counts' sum of squares S as (m S - x^2) / (m k^2), in exact
// integer arithmetic (m S and x^2 are below 2^53 for every n the loader
// accepts), so no cancellation.
//   - n* is truncated to [1, n]: deff^ < 1 (clusters more alike than chance
//     allows) is taken as no design effect, n* = n (common practice: a
//     design effect below one from a handful of clusters is noise);
//   - x = 0 or x = n: p^ (1 - p^) = 0 and v = 0, deff^ is 0/0; we take
//     n* = n, and the forms then give their usual limits at the boundary
//     (lower 0 at x = 0, upper 1 at x = n);
//   - one cluster (m = 1): no between-cluster variance can be estimated;
//     we take n* = n and no degrees-of-freedom adjustment, i.e. the simple
//     random sample's limits (stated in `covergrid methods`).
// Parameter `df_adjusted` (default true): Korn & Graubard's adjustment for
// the variance's m - 1 degrees of freedom, n*_df = n* (t_{n-1}(a) / t_{m-1}(a))^2
// with t_d(a) the upper-a quantile of Student's t on d degrees of freedom
// (Boost.Math); applied to every form alike, and a no-op for independent
// draws (m = n).
//
// Independent draws (clusters of one unit, m = n, S = x) give deff^ = n/(n - 1),
// n* = n - 1: these methods are then ordinary x-only methods, evaluated
// exactly like any other. Under a clustered design (SamplingModel::design()
// with k > 1) they need the cluster counts: needs_clusters() is true, the
// exact engine leaves their cells NaN, and Monte Carlo draws the clusters.
// One-sided bounds use the single tail a in z, t and the Beta quantiles.
#include "covergrid/methods/numerics.hpp"
#include "covergrid/methods/registry.hpp"
#include "shared_limits.hpp"

#include <boost/math/distributions/students_t.hpp>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <stdexcept>

namespace covergrid::methods {
namespace {

enum class Form { wilson, clopper_pearson, jeffreys };

/// The upper-a quantile of Student's t on `df` degrees of freedom.
double t_upper(double df, double a) {
  const boost::math::students_t_distribution<double, math_policy> t(df);
  return boost::math::quantile(boost::math::complement(t, a));
}

struct Effective {
  double x, n;
};

Effective effective_counts(int x, const ClusterCounts& c, double a, bool df_adjusted) {
  const std::int64_t m = c.clusters, k = c.cluster_size, n = m * k;
  const double p = static_cast<double>(x) / static_cast<double>(n);
  double n_eff = static_cast<double>(n);
  if (x > 0 && x < n && m >= 2) {
    const auto s = static_cast<std::int64_t>(c.sum_squares);
    const std::int64_t spread =
        m * s - static_cast<std::int64_t>(x) * x;  // m^2 k^2 times the variance of p_i
    const double v =
        static_cast<double>(spread) / static_cast<double>(m * k * k) / static_cast<double>(m * (m - 1));
    n_eff = v > 0 ? std::clamp(p * (1 - p) / v, 1.0, static_cast<double>(n)) : static_cast<double>(n);
  }
  if (df_adjusted && m >= 2 && m < n) {
    const double r = t_upper(static_cast<double>(n - 1), a) / t_upper(static_cast<double>(m - 1), a);
    n_eff *= r * r;
  }
  return {p * n_eff, n_eff};
}

class DesignEffect final : public IntervalMethod {
 public:
  DesignEffect(Form form, bool df_adjusted, int cluster_size)
      : form_(form), df_adjusted_(df_adjusted), cluster_size_(cluster_size) {}

  double lower(int x, int n, double a_lo) const override { return cluster_lower(x, independent(x, n), a_lo); }
  double upper(int x, int n, double a_hi) const override { return cluster_upper(x, independent(x, n), a_hi); }
  bool needs_clusters() const override { return cluster_size_ > 1; }
  std::shared_ptr<const IntervalMethod> for_design(const Design& design) const override {
    return std::make_shared<DesignEffect>(form_, df_adjusted_, design.cluster_size);
  }

  double cluster_lower(int x, const ClusterCounts& c, double a) const override {
    if (x == 0) return 0.0;
    const Effective e = effective_counts(x, c, a, df_adjusted_);
    switch (form_) {
      case Form::wilson:
        return wilson_limit(e.x, e.n, z_upper(a), -1);
      case Form::clopper_pearson:
        return beta_quantile(e.x, e.n - e.x + 1, a);
      case Form::jeffreys:
        return beta_quantile(e.x + 0.5, e.n - e.x + 0.5, a);
    }
    return 0.0;
  }
  double cluster_upper(int x, const ClusterCounts& c, double a) const override {
    if (x == c.clusters * c.cluster_size) return 1.0;
    const Effective e = effective_counts(x, c, a, df_adjusted_);
    switch (form_) {
      case Form::wilson:
        return wilson_limit(e.x, e.n, z_upper(a), +1);
      case Form::clopper_pearson:
        return beta_quantile_upper(e.x + 1, e.n - e.x, a);
      case Form::jeffreys:
        return beta_quantile_upper(e.x + 0.5, e.n - e.x + 0.5, a);
    }
    return 1.0;
  }

 private:
  /// x out of n as n clusters of one unit; under a clustered design x alone
  /// does not determine the limits (the engine never asks, needs_clusters()).
  ClusterCounts independent(int x, int n) const {
    if (cluster_size_ > 1)
      throw std::logic_error("a design-effect method under a clustered design needs the cluster counts");
    return {n, 1, static_cast<double>(x)};
  }

  Form form_;
  bool df_adjusted_;
  int cluster_size_;
};

ParamSpec df_param() {
  return {"df_adjusted",
          ParamSpec::Kind::boolean,
          true,
          "scale n* by (t_{n-1}/t_{m-1})^2 for the variance's m - 1 degrees of freedom (Korn & Graubard)",
          {},
          0,
          0};
}

constexpr const char* effective_text =
    "n* = p^(1-p^)/v, v = sum(p_i-p^)^2/(m(m-1)) from the m cluster proportions, truncated to [1, n] "
    "(n at x = 0, x = n and for one cluster), x* = p^ n*; df_adjusted (default): n* (t_{n-1}/t_{m-1})^2 "
    "for the m - 1 degrees of freedom (Korn & Graubard)";

std::unique_ptr<IntervalMethod> make(Form form, const ParamValues& p) {
  return std::make_unique<DesignEffect>(form, std::get<bool>(p.at("df_adjusted")), 1);
}

}  // namespace

MethodEntry deff_wilson_entry() {
  return {{"deff-wilson",
           "Wilson score on effective counts (design effect)",
           Family::approximate,
           {df_param()},
           "Kish (1965), Survey Sampling, sec. 8.2; Wilson (1927), J. Amer. Statist. Assoc. 22:209-212",
           std::string("Wilson's interval at (x*, n*); ") + effective_text + "; one-sided: z of the tail"},
          [](const ParamValues& p) { return make(Form::wilson, p); }};
}

MethodEntry deff_clopper_pearson_entry() {
  return {
      {"deff-clopper-pearson",
       "Clopper-Pearson on effective counts (Korn-Graubard)",
       Family::exact_tail,
       {df_param()},
       "Korn & Graubard (1998), Survey Methodology 24:193-201",
       std::string("L=Beta^-1(a_lo; x*, n*-x*+1), U=Beta^-1(1-a_hi; x*+1, n*-x*), L=0 at x=0, U=1 at x=n; ") +
           effective_text},
      [](const ParamValues& p) { return make(Form::clopper_pearson, p); }};
}

MethodEntry deff_jeffreys_entry() {
  return {{"deff-jeffreys",
           "Jeffreys on effective counts (design effect)",
           Family::bayesian,
           {df_param()},
           "Kish (1965), Survey Sampling, sec. 8.2; Brown, Cai & DasGupta (2001), Statist. Sci. 16:101-133",
           std::string("Beta(x*+1/2, n*-x*+1/2) quantiles, L=0 at x=0, U=1 at x=n; ") + effective_text +
               "; one-sided: single tail"},
          [](const ParamValues& p) { return make(Form::jeffreys, p); }};
}

}  // namespace covergrid::methods
