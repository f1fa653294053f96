// SHA-256 against the FIPS 180-2 appendix B test vectors (reference: NIST
// FIPS 180-2, Appendix B.1 and B.2) and the empty-string digest (from memory,
// widely published).
#include "covergrid/engine/sha256.hpp"

#include <catch2/catch.hpp>

TEST_CASE("sha256 known answers", "[engine][sha256]") {
  using covergrid::engine::sha256_hex;
  CHECK(sha256_hex("abc") == "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
  CHECK(sha256_hex("abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq") ==
        "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1");
  CHECK(sha256_hex("") == "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855");
  CHECK(sha256_hex("abd") != sha256_hex("abc"));
}
