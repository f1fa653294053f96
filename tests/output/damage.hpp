#pragma once
// Damages a cube the way a bad disk or a stray write would: 16 bytes in the
// middle of a dataset's first stored chunk are inverted in place, found with
// H5Dget_chunk_info (HDF5 1.10.5+). Shared by the checksum tests.
#include "covergrid/output/hdf5.hpp"

#include <cstdio>
#include <stdexcept>
#include <string>
#include <vector>

namespace covergrid::test {

/// Inverts 16 bytes inside the first stored chunk of `dataset` in `path`;
/// returns the chunk's file offset.
inline haddr_t damage_chunk(const std::string& path, const std::string& dataset) {
  haddr_t addr = 0;
  hsize_t size = 0;
  {
    output::File f = output::File::open(path, false);
    output::Handle d = output::open_dataset(f.id(), dataset);
    output::Handle space(H5Dget_space(d.get()), H5Sclose);
    unsigned mask = 0;
    std::vector<hsize_t> offset(output::shape(d.get()).size());
    output::check(H5Dget_chunk_info(d.get(), space.get(), 0, offset.data(), &mask, &addr, &size),
                  "find the first chunk of " + dataset);
  }
  if (size < 16) throw std::runtime_error("chunk of " + dataset + " is too small to damage");
  std::FILE* f = std::fopen(path.c_str(), "r+b");
  if (!f) throw std::runtime_error("cannot open " + path);
  const long at = static_cast<long>(addr + (size - 16) / 2);
  unsigned char bytes[16];
  std::fseek(f, at, SEEK_SET);
  const bool ok = std::fread(bytes, 1, sizeof bytes, f) == sizeof bytes;
  for (auto& b : bytes) b = static_cast<unsigned char>(~b);
  std::fseek(f, at, SEEK_SET);
  const bool written = ok && std::fwrite(bytes, 1, sizeof bytes, f) == sizeof bytes;
  std::fclose(f);
  if (!written) throw std::runtime_error("cannot damage " + path);
  return addr;
}

}  // namespace covergrid::test
