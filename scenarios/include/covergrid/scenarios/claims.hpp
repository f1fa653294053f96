#pragma once
/// The claims-file loader for `covergrid audit --claims FILE`: TOML text in,
/// validated engine::Claim list out, with messages naming the file, line and
/// key, as for scenarios.
///
///   seed = 7                       # optional: the stream key for simulated claims
///   [[claim]]
///   name = "release note, n >= 30" # optional
///   method = "wilson"              # or { id = "jeffreys", boundary = false }
///   level = 0.95
///   side = "two-sided"             # optional (two-sided, lower-bound, upper-bound)
///   n = { from = 30, to = 200 }    # or a list [30, 50, 80] or one number
///   p = { from = 0.05, to = 0.95 } # or one number
///   tolerance = 0.01               # optional, default 0: coverage >= level - tolerance
///   about = "minimum"              # or "mean" (over p uniform on the range)
///   replicates = 0                 # optional: > 0 judges by simulation instead
///   p_points = 101                 # simulated claims: p points across the range
///   confidence = 0.95              # simulated claims: simultaneous confidence
#include "covergrid/engine/audit.hpp"

#include <string>
#include <string_view>
#include <vector>

namespace covergrid::scenarios {

std::vector<engine::Claim> load_claims_file(const std::string& path);
/// `base_dir`: the folder file names in the claims (a table method's file)
/// are resolved against; empty: as written.
std::vector<engine::Claim> load_claims_text(std::string_view text, const std::string& source_name,
                                            const std::string& base_dir = {});

/// Largest number of n values one claim may list or span.
inline constexpr std::size_t max_claim_n_count = 1'000'000;
/// Largest number of p points a simulated claim may ask for.
inline constexpr std::size_t max_claim_p_points = 100'000;

}  // namespace covergrid::scenarios
