#pragma once
// Limits that more than one method reuses (internal to methods/).
namespace covergrid::methods {

/// Clopper-Pearson limits (clopper_pearson.cpp); logit falls back to them at
/// x = 0 and x = n, and Blaker's interval lies inside them.
double clopper_pearson_lower(int x, int n, double a_lo);
double clopper_pearson_upper(int x, int n, double a_hi);

/// One Wilson score limit (wilson.cpp) at normal quantile z, sign -1 lower,
/// +1 upper; fpc-wilson calls it with its corrected z, the design-effect
/// form with effective (non-integer) counts.
double wilson_limit(double x, double n, double z, int sign);

/// The finite-population correction (N - n) / (N - 1) (fpc_wald.cpp); 1 for
/// N = 0 (an infinite population), 0 for a census. Shared by fpc-wald and
/// fpc-wilson.
double finite_population_correction(int n, double population);

}  // namespace covergrid::methods
