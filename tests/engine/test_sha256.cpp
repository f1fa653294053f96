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

TEST_CASE("sha256 fed in pieces equals the one-shot digest", "[engine][sha256]") {
  using covergrid::engine::Sha256;
  using covergrid::engine::sha256_hex;
  // One million 'a': NIST FIPS 180-2 Appendix B.3 (recalled from memory, confirmed with
  // hashlib.sha256 of Debian 12's Python 3.11).
  {
    Sha256 h;
    const std::string thousand(1000, 'a');
    for (int i = 0; i < 1000; ++i) h.update(thousand);
    CHECK(h.hex_digest() == "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0");
  }
  // Every split point of messages around the block and padding boundaries.
  std::string text;
  for (int i = 0; i < 200; ++i) text += static_cast<char>('A' + (i * 7) % 53);
  for (std::size_t size : {0u, 1u, 55u, 56u, 63u, 64u, 65u, 119u, 120u, 128u, 200u}) {
    const std::string message = text.substr(0, size);
    const std::string whole = sha256_hex(message);
    for (std::size_t cut = 0; cut <= size; ++cut) {
      Sha256 h;
      h.update(std::string_view(message).substr(0, cut));
      h.update(std::string_view(message).substr(cut));
      INFO("size " << size << " cut " << cut);
      CHECK(h.hex_digest() == whole);
    }
  }
}
