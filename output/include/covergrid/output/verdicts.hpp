#pragma once
/// Verdict tables for `covergrid audit`: text for people, CSV and JSON for
/// machines. Our own layout.
#include "covergrid/engine/audit.hpp"

#include <string>
#include <vector>

namespace covergrid::output {

enum class VerdictFormat { text, csv, json };

/// "30..100" for a consecutive range, "10, 20, 50" for a short list, else
/// "30..500 (k values)".
std::string n_set_text(const std::vector<int>& n);

std::string verdict_table(const std::vector<engine::Claim>& claims,
                          const std::vector<engine::Verdict>& verdicts, VerdictFormat format);

}  // namespace covergrid::output
