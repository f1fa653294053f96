#pragma once
// Internal to the engine (not installed): the point-wise paths of the exact
// engine, in exact_points.cpp.
#include "covergrid/engine/exact.hpp"
#include "covergrid/engine/interval_table.hpp"
#include "covergrid/engine/sampling_model.hpp"

#include <array>
#include <cstdint>

namespace covergrid::engine::detail {

/// P(covered), P(U < p) and P(L > p) at p, summed over the model's window.
std::array<double, 3> point_probabilities(const IntervalTable& table, double p, const SamplingModel& model,
                                          ProbabilityWindow& window);

/// Models on a lattice (SamplingModel::lattice() = L): the minimum of
/// coverage over the points k/L in [p_lo, p_hi] (see coverage_infimum), the
/// means of P(covered), P(U < p), P(L > p) over those points, and the range's
/// length times the share of points with coverage below `threshold`.
InfimumResult lattice_infimum(const IntervalTable& table, double p_lo, double p_hi, double stop_below,
                              const SamplingModel& model);
std::array<double, 3> lattice_means(const IntervalTable& table, double p_lo, double p_hi,
                                    const SamplingModel& model);
double lattice_measure_below(const IntervalTable& table, double p_lo, double p_hi, double threshold,
                             const SamplingModel& model);

/// Models with neither a lattice nor a closed-form mass: the same three
/// means over p uniform on [p_lo, p_hi] by Gauss-Legendre quadrature.
std::array<double, 3> quadrature_means(const IntervalTable& table, double p_lo, double p_hi,
                                       const SamplingModel& model);

}  // namespace covergrid::engine::detail
