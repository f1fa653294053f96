#pragma once
/// SHA-256 (FIPS 180-4) of a byte string, as 64 lower-case hex digits.
/// Our own ~60 lines: the cube only needs a scenario checksum, and a crypto
/// library dependency for that would be heavier than the code.
#include <array>
#include <cstdint>
#include <string>
#include <string_view>

namespace covergrid::engine {

std::string sha256_hex(std::string_view data);

/// The same digest fed in pieces (for files too large to hold in memory):
/// update() any number of times, then hex_digest() once.
class Sha256 {
 public:
  Sha256();
  void update(std::string_view data);
  /// Pads, finishes and returns the digest; the object is spent afterwards.
  std::string hex_digest();

 private:
  std::array<std::uint32_t, 8> h_;
  std::array<unsigned char, 64> pending_{};
  std::size_t pending_size_ = 0;
  std::uint64_t total_ = 0;
};

}  // namespace covergrid::engine
