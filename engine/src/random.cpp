#include "covergrid/engine/random.hpp"

#include <Random123/philox.h>

namespace covergrid::engine {

CellStream::CellStream(std::uint64_t seed, std::uint32_t model, std::uint32_t n, std::uint32_t p_index)
    : key_{static_cast<std::uint32_t>(seed), static_cast<std::uint32_t>(seed >> 32)},
      cell_{p_index, (model << 24) | n} {}

void CellStream::uniforms(std::uint64_t first, std::size_t count, double* out) const {
  const philox4x32_key_t key = {{key_[0], key_[1]}};
  std::uint64_t block = first / 2;
  bool skip_first_half = (first % 2) != 0;
  std::size_t i = 0;
  // A plain loop over consecutive counters: each call is independent, so the
  // compiler can interleave them; results are Random123's exactly.
  while (i < count) {
    const philox4x32_ctr_t ctr = {
        {static_cast<std::uint32_t>(block), static_cast<std::uint32_t>(block >> 32), cell_[0], cell_[1]}};
    const philox4x32_ctr_t r = philox4x32(ctr, key);
    const std::uint64_t a = (std::uint64_t{r.v[0]} << 32) | r.v[1];
    const std::uint64_t b = (std::uint64_t{r.v[2]} << 32) | r.v[3];
    if (!skip_first_half) out[i++] = static_cast<double>(a >> 11) * 0x1.0p-53;
    skip_first_half = false;
    if (i < count) out[i++] = static_cast<double>(b >> 11) * 0x1.0p-53;
    ++block;
  }
}

void philox4x32_10(const std::uint32_t counter[4], const std::uint32_t key[2], std::uint32_t out[4]) {
  const philox4x32_ctr_t ctr = {{counter[0], counter[1], counter[2], counter[3]}};
  const philox4x32_key_t k = {{key[0], key[1]}};
  const philox4x32_ctr_t r = philox4x32_R(10, ctr, k);
  for (int i = 0; i < 4; ++i) out[i] = r.v[i];
}

}  // namespace covergrid::engine
