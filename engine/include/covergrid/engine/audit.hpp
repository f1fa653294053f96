#pragma once
/// Coverage claims and their verdicts (`covergrid audit`; README, "Auditing a claim").
///
/// A claim says that a method, at a level and side, keeps its coverage at or
/// above nominal - tolerance for every n of a set, over a p-range: either its
/// minimum over p (the continuous infimum) or its mean over p uniform on the
/// range. Exact evaluation decides with the exact infimum or exact mean
/// (binomial model). Simulation decides at a grid of p points with
/// simultaneous Clopper-Pearson bounds (Bonferroni over every cell of the
/// claim), and can be inconclusive.
#include "covergrid/engine/estimate.hpp"
#include "covergrid/engine/scenario.hpp"

#include <cstdint>
#include <string>
#include <vector>

namespace covergrid::engine {

enum class ClaimKind { minimum, mean };
enum class Outcome { holds, refuted, inconclusive };

struct Claim {
  std::string name;  // shown in verdict tables
  methods::MethodInstance method;
  std::shared_ptr<const SamplingModel> model = binomial_model_ptr();  // the sampling model judged under
  double level = 0.95;
  Side side = Side::two_sided;
  std::vector<int> n;  // strictly increasing, >= 1
  double p_lo = 0, p_hi = 1;
  double tolerance = 0;  // the claim is coverage >= level - tolerance
  ClaimKind kind = ClaimKind::minimum;
  /// Monte Carlo instead of exact sums when replicates > 0: `p_points`
  /// equally spaced p across the range, `replicates` draws per cell from the
  /// counter-based stream keyed by `seed`, and bounds with simultaneous
  /// confidence `confidence` over all cells.
  std::uint64_t replicates = 0;
  std::size_t p_points = 101;
  double confidence = 0.95;
  std::uint64_t seed = 0;

  double threshold() const { return level - tolerance; }
};

struct Verdict {
  Outcome outcome = Outcome::holds;
  bool simulated = false;
  double threshold = 0;
  /// The worst case: for a minimum claim the (n, p) of the smallest coverage
  /// (exact: the continuous infimum, approached from `worst_from` = -1 below
  /// p, +1 above, 0 attained); for a mean claim the n of the smallest mean.
  int worst_n = 0;
  double worst_p = 0;
  int worst_from = 0;
  double worst_coverage = 0;
  /// Where the misses fall at the worst case: P(interval wholly below p) and
  /// P(wholly above p) (means over p for a mean claim).
  double worst_miss_low = 0, worst_miss_high = 0;
  bool refined = false;  // the exact sweep met a non-contiguous covered set somewhere
  /// How many n of the claim fall below the threshold (minimum claim: their
  /// infimum; mean claim: their mean; simulated: their upper bound).
  std::size_t n_below = 0;
  std::size_t n_count = 0;
  /// Share of the (n, p) region with coverage below the threshold: exact, the
  /// mean over n of the measure of such p divided by the range's length;
  /// simulated, the share of cells whose upper bound is below it.
  double share_below = 0;
  bool share_approximate = false;
  /// Simulated claims: the simultaneous bounds at the deciding cell, the
  /// number of cells, the correction used, and for an inconclusive verdict
  /// the replicates per cell estimated to decide it (0 when the estimate sits
  /// on the threshold and no number would).
  double lower_bound = 0, upper_bound = 0;
  std::size_t cells = 0;
  std::uint64_t replicates = 0;
  std::string correction;
  std::uint64_t replicates_to_decide = 0;
  /// A simulated claim that comes out inconclusive is also decided by the
  /// exact engine when the model has exact sums (the binomial): its outcome
  /// and worst case, so the output can say that no more replicates are needed.
  bool exact_decided = false;
  Outcome exact_outcome = Outcome::holds;
  int exact_worst_n = 0;
  double exact_worst_p = 0, exact_worst_coverage = 0;
};

/// Called once for each n of a claim when its work is done, from whichever
/// worker thread did it (the callee must be thread-safe).
using AuditProgressFn = std::function<void(int n)>;

/// Decides a claim. `threads` = 0 uses every core. Throws InputError for a
/// claim the method cannot answer (a side it does not define).
Verdict audit_claim(const Claim& claim, int threads = 0, const AuditProgressFn& progress = {});

/// What deciding the claim will cost, from probes of its own per-n work
/// (estimate_per_n; about half a second at most). A simulated claim's probes
/// draw at most 64 replicates per cell; the rest is timed on one cell and
/// scaled. An inconclusive simulated claim is also decided exactly
/// afterwards, which this does not include.
WorkEstimate estimate_audit(const Claim& claim, int threads = 0);

const char* outcome_name(Outcome o);

}  // namespace covergrid::engine
