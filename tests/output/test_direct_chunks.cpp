// The direct chunk writer against HDF5's own write path: the same stored
// bytes, checksum included, for blocks that end inside the dataset's last
// chunks; and our Fletcher-32 against the checksum HDF5's filter stores.
#include "support.hpp"

#include "covergrid/output/hdf5.hpp"

#include <catch2/catch.hpp>
#include <hdf5_hl.h>

#include <cmath>
#include <cstdint>
#include <cstring>
#include <random>
#include <vector>

namespace o = covergrid::output;
using covergrid::test::ScratchDir;

namespace {

/// The stored bytes of the chunk at `offset`, filter mask and all.
std::vector<unsigned char> stored_chunk(hid_t dataset, const std::vector<hsize_t>& offset,
                                        std::uint32_t& mask) {
  hsize_t size = 0;
  o::check(H5Dget_chunk_storage_size(dataset, offset.data(), &size), "chunk size");
  std::vector<unsigned char> bytes(size);
  o::check(H5Dread_chunk(dataset, H5P_DEFAULT, offset.data(), &mask, bytes.data()), "read a chunk");
  return bytes;
}

}  // namespace

TEST_CASE("fletcher32 is the checksum HDF5's Fletcher-32 filter stores", "[output][hdf5]") {
  ScratchDir dir("direct-chunks");
  o::quiet_hdf5_errors();
  auto file = o::File::create(dir.path().string() + "/f.h5");
  std::mt19937_64 g(7);
  // Odd and even byte counts, under, at and over one 360-word block, and
  // values that fill the 16-bit words (the folds then carry).
  for (std::size_t elements : {1u, 45u, 90u, 91u, 1000u, 16384u}) {
    // uint8 data gives any byte count, odd ones included.
    for (bool bytes_only : {false, true}) {
      std::string name = "d";
      name += std::to_string(elements);
      name += bytes_only ? "b" : "f";
      const std::size_t count = bytes_only ? elements * 8 + 3 : elements;
      const std::vector<hsize_t> dims = {count};
      o::Handle space(o::check_id(H5Screate_simple(1, dims.data(), nullptr), "space"), H5Sclose);
      o::Handle dcpl(o::check_id(H5Pcreate(H5P_DATASET_CREATE), "dcpl"), H5Pclose);
      o::check(H5Pset_chunk(dcpl.get(), 1, dims.data()), "chunk");
      o::check(H5Pset_fletcher32(dcpl.get()), "fletcher");
      const hid_t type = bytes_only ? H5T_NATIVE_UINT8 : H5T_IEEE_F64LE;
      o::Handle d(o::check_id(H5Dcreate2(file.id(), name.c_str(), type, space.get(), H5P_DEFAULT, dcpl.get(),
                                         H5P_DEFAULT),
                              "create"),
                  H5Dclose);
      std::vector<unsigned char> data(count * (bytes_only ? 1 : 8));
      for (auto& b : data) b = static_cast<unsigned char>(g() % 4 == 0 ? 0xff : g());
      o::check(H5Dwrite(d.get(), bytes_only ? H5T_NATIVE_UINT8 : H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL,
                        H5P_DEFAULT, data.data()),
               "write");
      std::uint32_t mask = 1;
      const auto stored = stored_chunk(d.get(), {0}, mask);
      INFO(name);
      REQUIRE(stored.size() == data.size() + 4);
      CHECK(mask == 0);
      CHECK(std::memcmp(stored.data(), data.data(), data.size()) == 0);
      const std::uint32_t ours = o::fletcher32(data.data(), data.size());
      std::uint32_t theirs = 0;
      for (int b = 0; b < 4; ++b) theirs |= static_cast<std::uint32_t>(stored[data.size() + b]) << (8 * b);
      CHECK(ours == theirs);
    }
  }
}

TEST_CASE("write_whole_chunks stores what write_block stores, chunk for chunk", "[output][hdf5]") {
  ScratchDir dir("direct-chunks");
  o::quiet_hdf5_errors();
  auto file = o::File::create(dir.path().string() + "/w.h5");
  // A 4-D dataset whose last chunks are partial in two dimensions; blocks of
  // whole chunks, the last block ending at the dataset's edge.
  const std::vector<hsize_t> dims = {2, 5, 7, 11}, chunk = {1, 2, 4, 4};
  auto a = o::create_double_dataset(file.id(), "a", dims, chunk, o::ChunkedStorage{false, 0});
  auto b = o::create_double_dataset(file.id(), "b", dims, chunk, o::ChunkedStorage{false, 0});
  std::mt19937_64 g(11);
  std::normal_distribution<double> z;
  const std::vector<std::vector<hsize_t>> starts = {{0, 0, 0, 0}, {0, 0, 4, 8}, {1, 4, 0, 4}, {1, 0, 4, 0}};
  for (const auto& start : starts) {
    std::vector<hsize_t> count(4);
    for (std::size_t d = 0; d < 4; ++d) count[d] = std::min<hsize_t>(dims[d] - start[d], 2 * chunk[d]);
    std::vector<double> data(count[0] * count[1] * count[2] * count[3]);
    for (auto& v : data) v = z(g);
    data[0] = std::nan("");  // a NaN payload of its own travels as it is
    o::write_block(a.get(), start, count, data.data());
    o::write_whole_chunks(b.get(), chunk, start, count, data.data(), o::takes_whole_chunks(b.get()));
  }
  hsize_t chunks_a = 0, chunks_b = 0;
  o::Handle space_a(o::check_id(H5Dget_space(a.get()), "space"), H5Sclose);
  o::Handle space_b(o::check_id(H5Dget_space(b.get()), "space"), H5Sclose);
  o::check(H5Dget_num_chunks(a.get(), space_a.get(), &chunks_a), "count");
  o::check(H5Dget_num_chunks(b.get(), space_b.get(), &chunks_b), "count");
  REQUIRE(chunks_a == chunks_b);
  REQUIRE(chunks_a > 4);
  REQUIRE(o::takes_whole_chunks(b.get()));
  for (hsize_t i = 0; i < chunks_a; ++i) {
    std::vector<hsize_t> offset(4);
    unsigned mask = 0;
    haddr_t addr = 0;
    hsize_t size = 0;
    o::check(H5Dget_chunk_info(a.get(), space_a.get(), i, offset.data(), &mask, &addr, &size), "info");
    std::uint32_t mask_a = 1, mask_b = 1;
    const auto sa = stored_chunk(a.get(), offset, mask_a), sb = stored_chunk(b.get(), offset, mask_b);
    INFO("chunk at " << offset[0] << "," << offset[1] << "," << offset[2] << "," << offset[3]);
    CHECK(mask_a == mask_b);
    CHECK(sa == sb);
  }
  // Read back through HDF5 (which verifies the checksums) the values are the same.
  std::vector<double> all_a(dims[0] * dims[1] * dims[2] * dims[3]), all_b(all_a.size());
  o::read_block(a.get(), {0, 0, 0, 0}, dims, all_a.data());
  o::read_block(b.get(), {0, 0, 0, 0}, dims, all_b.data());
  CHECK(std::memcmp(all_a.data(), all_b.data(), all_a.size() * sizeof(double)) == 0);
}

TEST_CASE("write_whole_chunks refuses a block that does not start a chunk", "[output][hdf5]") {
  ScratchDir dir("direct-chunks");
  o::quiet_hdf5_errors();
  auto file = o::File::create(dir.path().string() + "/r.h5");
  auto a = o::create_double_dataset(file.id(), "a", {8}, {4}, o::ChunkedStorage{false, 0});
  const std::vector<double> data(4, 1.0);
  CHECK_THROWS_AS(o::write_whole_chunks(a.get(), {4}, {2}, {4}, data.data(), true), std::logic_error);
  // A compressed dataset does not take whole chunks from us.
  auto c = o::create_double_dataset(file.id(), "c", {8}, {4}, o::ChunkedStorage{true, 0});
  CHECK(o::takes_whole_chunks(a.get()));
  CHECK_FALSE(o::takes_whole_chunks(c.get()));
}
