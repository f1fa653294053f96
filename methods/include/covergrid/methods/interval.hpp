#pragma once
/// The interval-method interface: a method turns observed data (x successes
/// in n trials) and tail probabilities into confidence limits.
///
/// Conventions shared by every method (README, "Interval methods"):
///  - two-sided at level 1-a uses a_lo = a_hi = a/2;
///  - a lower bound at level 1-a uses a_lo = a and upper limit 1;
///  - an upper bound at level 1-a uses a_hi = a and lower limit 0;
///  - methods that are not equal-tailed override two_sided() and say in
///    their file how their one-sided bounds are defined;
///  - raw limits are reported before clipping to [0, 1].
#include <map>
#include <memory>
#include <stdexcept>
#include <string>
#include <string_view>
#include <variant>
#include <vector>

namespace covergrid::methods {

enum class Side { two_sided, lower_bound, upper_bound };

/// "two-sided", "lower-bound", "upper-bound".
std::string_view side_name(Side side);
/// Parses a side name; returns false when the name is not one of the three.
bool parse_side(std::string_view name, Side& side);

/// Limits before clipping.
struct RawLimits {
  double lower;
  double upper;
};

/// Clipped limits with the raw values they came from.
struct Limits {
  double lower;
  double upper;
  double raw_lower;
  double raw_upper;
};

enum class Family { approximate, exact_tail, bayesian, likelihood, user_table };
std::string_view family_name(Family family);

/// Thrown for a parameter a method does not take or a value it cannot use;
/// `key` names the parameter so that callers can point at the input.
class ParameterError : public std::runtime_error {
 public:
  ParameterError(std::string key, const std::string& message)
      : std::runtime_error(message), key_(std::move(key)) {}
  const std::string& key() const { return key_; }

 private:
  std::string key_;
};

/// Thrown when a root finder or special function cannot deliver a limit.
class NumericalError : public std::runtime_error {
 public:
  using std::runtime_error::runtime_error;
};

using ParamValue = std::variant<bool, double, std::string>;
using ParamValues = std::map<std::string, ParamValue, std::less<>>;

struct ParamSpec {
  /// path: a file name, resolved against the folder of the scenario or
  /// claims file that names it (the command line: the working folder).
  enum class Kind { boolean, number, choice, path };
  std::string name;
  Kind kind;
  ParamValue default_value;
  std::string description;
  std::vector<std::string> choices;  // for Kind::choice
  double min = 0.0;                  // for Kind::number: open lower bound
  double max = 0.0;                  // for Kind::number: 0 = unbounded above
  bool min_closed = false;           // for Kind::number: min itself is allowed
};

/// What a design-aware method may know about how the sample was drawn,
/// from the sampling model it is evaluated under: the population size N of a
/// finite population (0: infinite, or drawn with replacement) and the cluster
/// size of a clustered sample (1: independent draws).
struct Design {
  double population = 0;
  int cluster_size = 1;
  bool operator==(const Design&) const = default;
};

/// What a design-effect method reads of a clustered sample beyond x: m
/// clusters of k units each (n = m k) and the sum of the squared cluster
/// counts, sum of y_i^2, from which the between-cluster variance follows
/// (equal cluster sizes). Independent draws are m = n clusters of one unit,
/// whose squared counts sum to x.
struct ClusterCounts {
  int clusters = 0;
  int cluster_size = 1;
  double sum_squares = 0;
};

/// One method of the catalog, with its parameters already bound.
class IntervalMethod {
 public:
  virtual ~IntervalMethod() = default;
  IntervalMethod() = default;
  IntervalMethod(const IntervalMethod&) = delete;
  IntervalMethod& operator=(const IntervalMethod&) = delete;

  /// Raw lower limit at lower-tail probability a_lo, 0 < a_lo < 1.
  virtual double lower(int x, int n, double a_lo) const = 0;
  /// Raw upper limit at upper-tail probability a_hi, 0 < a_hi < 1.
  virtual double upper(int x, int n, double a_hi) const = 0;
  /// Raw two-sided interval at level 1 - alpha; equal tails unless overridden.
  virtual RawLimits two_sided(int x, int n, double alpha) const {
    return {lower(x, n, alpha / 2), upper(x, n, alpha / 2)};
  }
  /// Whether the method defines this side (Blaker is two-sided only).
  virtual bool supports(Side side) const {
    (void)side;
    return true;
  }
  /// Whether L(x) = 1 - U(n - x) holds, so coverage(p) = coverage(1 - p).
  virtual bool symmetric() const { return true; }
  /// The method as it applies to samples drawn under `design`, for methods
  /// that use it (finite-population corrections, exact hypergeometric
  /// limits); nullptr for the rest, which mean the method itself. The
  /// engine builds interval tables per sampling model through this.
  virtual std::shared_ptr<const IntervalMethod> for_design(const Design& design) const {
    (void)design;
    return nullptr;
  }
  /// True when the method needs the cluster counts and not only x (a
  /// design-effect method bound to a design with clusters of more than one
  /// unit). Its limits then come from cluster_lower()/cluster_upper(); the
  /// exact engine, which sums over x, leaves its cells NaN, and Monte Carlo
  /// draws the clusters (engine/src/monte_carlo.cpp).
  virtual bool needs_clusters() const { return false; }
  /// Raw limits from a clustered sample; the default ignores the clusters.
  virtual double cluster_lower(int x, const ClusterCounts& c, double a_lo) const {
    return lower(x, c.clusters * c.cluster_size, a_lo);
  }
  virtual double cluster_upper(int x, const ClusterCounts& c, double a_hi) const {
    return upper(x, c.clusters * c.cluster_size, a_hi);
  }
  /// True for a method with limits only for some (n, level, side) (a table
  /// read from a file); missing() then says what is absent.
  virtual bool limited_domain() const { return false; }
  /// Why the method has no limits for some x = 0..n at (level, side) (the
  /// first missing row, naming its file); empty when it has them all.
  virtual std::string missing(int n, double level, Side side) const {
    (void)n;
    (void)level;
    (void)side;
    return {};
  }
};

/// `method` under `design`: the bound form when the method uses the design,
/// else `method` itself.
std::shared_ptr<const IntervalMethod> under_design(const std::shared_ptr<const IntervalMethod>& method,
                                                   const Design& design);

/// The interval for (x, n) at `level` on `side`, raw and clipped.
/// Precondition: method.supports(side), 0 <= x <= n, n >= 1, 0 < level < 1.
Limits interval(const IntervalMethod& method, int x, int n, double level, Side side);

/// The same from a clustered sample's counts (n = c.clusters * c.cluster_size),
/// through cluster_lower()/cluster_upper(), equal-tailed when two-sided.
Limits clustered_interval(const IntervalMethod& method, int x, const ClusterCounts& c, double level,
                          Side side);

}  // namespace covergrid::methods
