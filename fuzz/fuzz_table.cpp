// libFuzzer target: the table method's CSV reader. Any bytes, written to a
// file, are either a table (whose rows are then looked up, at n = 1..12 and
// the levels and sides a grid may ask for) or a ParameterError naming the
// file; a lookup is either limits inside [0, 1] with lower <= upper or a
// NumericalError naming the missing row. Anything else is a finding.
#include "covergrid/methods/interval.hpp"
#include "covergrid/methods/registry.hpp"

#include <unistd.h>

#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <string>

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  namespace m = covergrid::methods;
  static const std::string path = "/tmp/covergrid-fuzz-table-" + std::to_string(getpid()) + ".csv";
  std::FILE* f = std::fopen(path.c_str(), "wb");
  if (!f) std::abort();
  if (size > 0 && std::fwrite(data, 1, size, f) != size) std::abort();
  std::fclose(f);
  m::MethodInstance table;
  try {
    table = m::make_instance("table", {{"file", path}});
  } catch (const m::ParameterError& e) {
    if (std::string(e.what()).rfind(path, 0) != 0 || e.key() != "file") std::abort();
    return 0;
  }
  for (int n = 1; n <= 12; ++n)
    for (double level : {0.9, 0.95})
      for (auto side : {m::Side::two_sided, m::Side::lower_bound, m::Side::upper_bound}) {
        if (!table.method->supports(side)) continue;
        const bool complete = table.method->missing(n, level, side).empty();
        for (int x = 0; x <= n; ++x) {
          try {
            const auto l = m::interval(*table.method, x, n, level, side);
            if (!(l.lower >= 0 && l.upper <= 1 && l.lower <= l.upper)) std::abort();
          } catch (const m::NumericalError& e) {
            if (complete) std::abort();  // missing() said every row was there
            if (std::string(e.what()).rfind(path, 0) != 0) std::abort();
          }
        }
      }
  return 0;
}
