// The journal record decoder on crafted payloads: every size it reads is
// bounded by the bytes the record holds before anything is allocated, so a
// record with a valid checksum and an absurd vector size is damage (a
// CubeError, which the resume walk turns into "dropped 1 damaged record"),
// never an allocation failure or an internal error.
#include "covergrid/engine/error.hpp"
#include "covergrid/output/cube.hpp"

#include <catch2/catch.hpp>

#include <cstdint>
#include <string>

namespace o = covergrid::output;

namespace {

std::string payload_with_size(std::uint64_t size, std::size_t trailing_bytes) {
  std::string p;
  p.push_back(static_cast<char>(1));  // flags: exact metrics present
  p.append(reinterpret_cast<const char*>(&size), sizeof size);
  p.append(trailing_bytes, '\0');
  return p;
}

}  // namespace

TEST_CASE("a journal vector size of 2^61 + 1 is damage, not an allocation", "[output][journal][robustness]") {
  // 2^61 + 1 doubles are 2^64 + 8 bytes: the product wraps to 8, which the
  // 8 trailing bytes would satisfy if the size were checked as a byte count.
  for (const std::uint64_t size : {(std::uint64_t{1} << 61) + 1, std::uint64_t{1} << 62, ~std::uint64_t{0}}) {
    INFO(size);
    const std::string p = payload_with_size(size, 8);
    covergrid::engine::ChunkResult r;
    CHECK_THROWS_AS(o::decode_chunk(p.data(), p.size(), r), o::CubeError);
  }
}

TEST_CASE("a journal vector that fits its record decodes", "[output][journal][robustness]") {
  // The control: one double announced and present reads back (the rest of
  // the record is missing, so the next vector's size is then cut short).
  const std::string p = payload_with_size(1, 8);
  covergrid::engine::ChunkResult r;
  CHECK_THROWS_WITH(o::decode_chunk(p.data(), p.size(), r), Catch::Contains("shorter than its contents"));
  CHECK(r.exact[0].size() == 1);
}

TEST_CASE("a journal vector of size 0 decodes without touching a null pointer",
          "[output][journal][robustness]") {
  // scripts/fuzz (fuzz_journal) found memcpy(nullptr, ..., 0) here, undefined
  // behaviour that the sanitizer build reports: the sizes are all zero.
  std::string p;
  p.push_back(static_cast<char>(1));  // exact metrics present, each an empty vector
  const std::uint64_t zero = 0;
  for (std::size_t k = 0; k < covergrid::engine::metric_count; ++k)
    p.append(reinterpret_cast<const char*>(&zero), sizeof zero);
  covergrid::engine::ChunkResult r;
  o::decode_chunk(p.data(), p.size(), r);
  CHECK(r.has_exact);
  CHECK(r.exact[0].empty());
}
