#pragma once
// Limits that more than one method reuses (internal to methods/).
namespace covergrid::methods {

/// Clopper-Pearson limits (clopper_pearson.cpp); logit falls back to them at
/// x = 0 and x = n, and Blaker's interval lies inside them.
double clopper_pearson_lower(int x, int n, double a_lo);
double clopper_pearson_upper(int x, int n, double a_hi);

}  // namespace covergrid::methods
