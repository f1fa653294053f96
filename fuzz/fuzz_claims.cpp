// libFuzzer target: the claims-file loader. Any bytes are either claims or
// an InputError naming the file; anything else is a finding.
#include "covergrid/engine/error.hpp"
#include "covergrid/scenarios/claims.hpp"

#include <cstdint>
#include <cstdlib>
#include <string>
#include <string_view>

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string_view text(reinterpret_cast<const char*>(data), size);
  try {
    const auto claims = covergrid::scenarios::load_claims_text(text, "fuzz.toml");
    if (claims.empty()) std::abort();  // a claims file has at least one claim
    for (const auto& c : claims)
      if (c.n.empty() || c.p_lo > c.p_hi) std::abort();
  } catch (const covergrid::InputError& e) {
    if (std::string(e.what()).rfind("fuzz.toml", 0) != 0) std::abort();
  }
  return 0;
}
