// libFuzzer target: the scenario loader. Any bytes are either a scenario or
// an InputError whose message is one line naming the file; anything else (a
// crash, a sanitizer report, another exception) is a finding.
#include "covergrid/engine/error.hpp"
#include "covergrid/scenarios/loader.hpp"

#include <cstdint>
#include <cstdlib>
#include <string>
#include <string_view>

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string_view text(reinterpret_cast<const char*>(data), size);
  try {
    // No output-folder checks: the fuzzer must not probe the file system.
    const auto s = covergrid::scenarios::load_scenario_text(text, "fuzz.toml", "", false);
    if (s.n.empty() || s.p.empty() || s.methods.empty()) std::abort();  // a scenario always has them
  } catch (const covergrid::InputError& e) {
    if (std::string(e.what()).rfind("fuzz.toml", 0) != 0) std::abort();  // names the file first
  }
  return 0;
}
