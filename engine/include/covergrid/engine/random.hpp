#pragma once
/// Counter-based random streams for Monte Carlo (design principle 3): every
/// draw is a pure function of (scenario seed, cell coordinates, replicate).
///
/// Random123's Philox4x32-10 with key = (seed low 32 bits, seed high 32 bits)
/// and counter = (replicate / 2, 0, p index, model << 24 | n). One call gives
/// 128 bits, i.e. two 52-bit uniforms, for replicates 2k and 2k + 1. So a
/// cell's draws never depend on which thread, chunk, shard or process
/// computes it, and cells never share a counter (n < 2^24, model < 256).
#include <cstddef>
#include <cstdint>

namespace covergrid::engine {

inline constexpr std::uint32_t max_stream_models = 256;
inline constexpr std::uint32_t max_stream_n = (1u << 24) - 1;

class CellStream {
 public:
  CellStream(std::uint64_t seed, std::uint32_t model, std::uint32_t n, std::uint32_t p_index);
  /// Uniforms in [0, 1) (52 bits) for replicates first .. first + count - 1;
  /// replicate r is half r % 2 of the Philox block r / 2, whatever `first` is.
  void uniforms(std::uint64_t first, std::size_t count, double* out) const;
  /// Uniforms for what replicate `replicate` draws beyond its x (a
  /// clustered sample's cluster counts): `count` (< 2^23) uniforms from
  /// Philox block 2^36 + replicate * 2^22 onward. These blocks are disjoint
  /// from the replicates' own (below 2^33 for the 10^10 replicates a cell
  /// may have) and from every other replicate's.
  void detail_uniforms(std::uint64_t replicate, std::size_t count, double* out) const {
    uniforms((std::uint64_t{1} << 37) + replicate * (std::uint64_t{1} << 23), count, out);
  }
  /// Word `word` (0..3) of the batched generator's output for Philox block
  /// `block`: the tests hold it equal to Random123's philox4x32.
  std::uint32_t raw_word(std::uint64_t block, int word) const;

 private:
  std::uint32_t key_[2];
  std::uint32_t cell_[2];
};

/// The raw Philox4x32-10 block for (counter, key): exposed for the
/// known-answer test against Random123's published vectors.
void philox4x32_10(const std::uint32_t counter[4], const std::uint32_t key[2], std::uint32_t out[4]);

}  // namespace covergrid::engine
