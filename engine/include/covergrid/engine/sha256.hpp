#pragma once
/// SHA-256 (FIPS 180-4) of a byte string, as 64 lower-case hex digits.
/// Our own ~60 lines: the cube only needs a scenario checksum, and a crypto
/// library dependency for that would be heavier than the code.
#include <string>
#include <string_view>

namespace covergrid::engine {

std::string sha256_hex(std::string_view data);

}  // namespace covergrid::engine
