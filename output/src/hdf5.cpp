#include "covergrid/output/hdf5.hpp"

#include <fcntl.h>
#include <fmt/format.h>
#include <hdf5_hl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <bit>
#include <cerrno>
#include <cmath>
#include <cstdint>
#include <cstring>
#include <limits>
#include <map>
#include <stdexcept>
#include <string_view>
#include <utility>

namespace covergrid::output {

void quiet_hdf5_errors() { H5Eset_auto2(H5E_DEFAULT, nullptr, nullptr); }

namespace {

/// HDF5 (1.10.8, Debian 12) closes every file still open when the process
/// exits. A file whose close failed (its last metadata could not be written:
/// a full disk) stays half-destroyed in its table, and that exit-time close
/// crashed the process (SIGSEGV in H5F__close_cb from H5_term_library).
/// Every handle of ours is closed by its RAII owner before exit, so the
/// library's exit handler has nothing to do but that crash: it is switched
/// off here, before any other HDF5 call (H5dont_atexit must come first).
const bool no_hdf5_exit_handler = [] {
  H5dont_atexit();
  return true;
}();

}  // namespace

namespace {

constexpr const char* checksum_reason = "Fletcher32 checksum";

/// The innermost description on HDF5's error stack (where the failure was
/// detected), or "" when there is none. H5Ewalk2 leaves the stack as it is.
std::string innermost_reason() {
  std::string reason;
  auto visit = [](unsigned, const H5E_error2_t* e, void* data) -> herr_t {
    auto* out = static_cast<std::string*>(data);
    if (out->empty() && e->desc && *e->desc) *out = e->desc;
    return 0;
  };
  H5Ewalk2(H5E_DEFAULT, H5E_WALK_UPWARD, visit, &reason);
  return reason;
}

/// Whether HDF5's error stack holds a system error for want of space: its
/// file drivers record the failed call's errno as "errno = N," (HDF5 1.10
/// H5FDsec2.c, HSYS_GOTO_ERROR).
bool stack_says_out_of_space() {
  bool found = false;
  auto visit = [](unsigned, const H5E_error2_t* e, void* data) -> herr_t {
    if (!e->desc) return 0;
    for (int code : {ENOSPC, EFBIG, EDQUOT})
      if (std::strstr(e->desc, ("errno = " + std::to_string(code) + ",").c_str()))
        *static_cast<bool*>(data) = true;
    return 0;
  };
  H5Ewalk2(H5E_DEFAULT, H5E_WALK_UPWARD, visit, &found);
  return found;
}

[[noreturn]] void fail(const std::string& what) {
  const std::string reason = innermost_reason();
  if (stack_says_out_of_space()) throw OutOfSpace("HDF5: cannot " + what + ": " + out_of_space_text);
  throw CubeError("HDF5: cannot " + what + (reason.empty() ? "" : " (" + reason + ")"));
}

}  // namespace

hid_t check_id(hid_t id, const std::string& what) {
  if (id < 0) fail(what);
  return id;
}

void check(herr_t status, const std::string& what) {
  if (status < 0) fail(what);
}

bool out_of_space_errno(int error) { return error == ENOSPC || error == EFBIG || error == EDQUOT; }

bool is_checksum_failure(const CubeError& e) {
  return std::string_view(e.what()).find(checksum_reason) != std::string_view::npos;
}

namespace {

/// File access: a bounded metadata cache (HDF5's default may grow to 32 MiB
/// with the number of chunks), so that memory does not grow with the grid.
Handle file_access() {
  Handle fapl(check_id(H5Pcreate(H5P_FILE_ACCESS), "make a file-access list"), H5Pclose);
  H5AC_cache_config_t config;
  config.version = H5AC__CURR_CACHE_CONFIG_VERSION;
  check(H5Pget_mdc_config(fapl.get(), &config), "read the metadata-cache settings");
  config.set_initial_size = true;
  config.initial_size = 1 << 20;
  config.min_size = 1 << 20;
  config.max_size = 4 << 20;
  check(H5Pset_mdc_config(fapl.get(), &config), "bound the metadata cache");
  return fapl;
}

/// Dataset access without a raw-data chunk cache: the cube writes and reads
/// whole storage chunks, so caching them would only hold memory.
Handle dataset_access() {
  Handle dapl(check_id(H5Pcreate(H5P_DATASET_ACCESS), "make a dataset-access list"), H5Pclose);
  check(H5Pset_chunk_cache(dapl.get(), 0, 0, 1.0), "turn off the chunk cache");
  return dapl;
}

}  // namespace

File File::create(const std::string& path) {
  quiet_hdf5_errors();
  File f;
  f.path_ = path;
  // Freed file space is never reused, so metadata written at the last flush
  // keeps pointing at intact bytes if a later write is cut short.
  Handle fcpl(check_id(H5Pcreate(H5P_FILE_CREATE), "make a file-creation list"), H5Pclose);
  check(H5Pset_file_space_strategy(fcpl.get(), H5F_FSPACE_STRATEGY_NONE, 0, 1),
        "set the file-space strategy");
  Handle fapl = file_access();
  // The HDF5 1.8 file format at least: object headers and B-trees carry
  // checksums (damage is reported, not followed), and an attribute larger
  // than 64 KiB (a long scenario text) goes to dense storage. netCDF-4
  // readers of HDF5 1.10 read it.
  check(H5Pset_libver_bounds(fapl.get(), H5F_LIBVER_V18, H5F_LIBVER_V110), "set the file-format bounds");
  f.h_ = Handle(check_id(H5Fcreate(path.c_str(), H5F_ACC_TRUNC, fcpl.get(), fapl.get()), "create " + path),
                H5Fclose);
  return f;
}

File File::open(const std::string& path, bool writable) {
  quiet_hdf5_errors();
  File f;
  f.path_ = path;
  Handle fapl = file_access();
  f.h_ = Handle(check_id(H5Fopen(path.c_str(), writable ? H5F_ACC_RDWR : H5F_ACC_RDONLY, fapl.get()),
                         "open " + path + " as an HDF5 file"),
                H5Fclose);
  return f;
}

void File::flush() const { check(H5Fflush(h_.get(), H5F_SCOPE_GLOBAL), "flush " + path_); }

Handle create_group(hid_t parent, const std::string& name) {
  // Links kept in the group's object header (compact storage), which the
  // HDF5 1.8 format checksums, up to far more than a cube's groups hold:
  // past 8 links HDF5 moves them to a fractal heap whose blocks carry no
  // checksum, and a damaged link there made H5Ovisit free a wild pointer
  // (found by scripts/fuzz).
  Handle gcpl(check_id(H5Pcreate(H5P_GROUP_CREATE), "make a group-creation list"), H5Pclose);
  check(H5Pset_link_phase_change(gcpl.get(), 4096, 4000), "keep links in the group header");
  return Handle(check_id(H5Gcreate2(parent, name.c_str(), H5P_DEFAULT, gcpl.get(), H5P_DEFAULT),
                         "create group " + name),
                H5Gclose);
}

Handle open_group(hid_t parent, const std::string& name) {
  return Handle(check_id(H5Gopen2(parent, name.c_str(), H5P_DEFAULT), "open group " + name), H5Gclose);
}

bool exists(hid_t parent, const std::string& path) {
  // Walk the path so that a missing intermediate group is "false", not an error.
  std::string prefix;
  std::size_t start = 0;
  while (start <= path.size()) {
    const std::size_t slash = path.find('/', start);
    prefix = path.substr(0, slash);
    if (!prefix.empty() && H5Lexists(parent, prefix.c_str(), H5P_DEFAULT) <= 0) return false;
    if (slash == std::string::npos) break;
    start = slash + 1;
  }
  return true;
}

Handle open_dataset(hid_t parent, const std::string& name) {
  Handle dapl = dataset_access();
  return Handle(check_id(H5Dopen2(parent, name.c_str(), dapl.get()), "open dataset " + name), H5Dclose);
}

namespace {

/// A chunked and checksummed dataset of `file_type`, shuffled and deflated
/// unless `storage` says otherwise.
Handle create_chunked(hid_t parent, const std::string& name, const std::vector<hsize_t>& dims,
                      const std::vector<hsize_t>& chunk, hid_t file_type, hid_t fill_type, const void* fill,
                      const ChunkedStorage& storage = {}) {
  const int rank = static_cast<int>(dims.size());
  Handle space(check_id(H5Screate_simple(rank, dims.data(), nullptr), "make a dataspace"), H5Sclose);
  Handle dcpl(check_id(H5Pcreate(H5P_DATASET_CREATE), "make a dataset-creation list"), H5Pclose);
  check(H5Pset_chunk(dcpl.get(), rank, chunk.data()), "set chunking for " + name);
  if (storage.compress) {
    check(H5Pset_shuffle(dcpl.get()), "set shuffle for " + name);
    check(H5Pset_deflate(dcpl.get(), 1), "set compression for " + name);
  }
  // Last in the pipeline: the checksum covers the bytes as stored.
  check(H5Pset_fletcher32(dcpl.get()), "set the Fletcher-32 checksum for " + name);
  if (fill) check(H5Pset_fill_value(dcpl.get(), fill_type, fill), "set the fill value of " + name);
  check(H5Pset_fill_time(dcpl.get(), H5D_FILL_TIME_IFSET), "set the fill time of " + name);
  Handle dapl = dataset_access();
  if (storage.cache_bytes > 0)
    check(H5Pset_chunk_cache(dapl.get(), 521, storage.cache_bytes, 1.0), "set the chunk cache of " + name);
  return Handle(
      check_id(H5Dcreate2(parent, name.c_str(), file_type, space.get(), H5P_DEFAULT, dcpl.get(), dapl.get()),
               "create dataset " + name),
      H5Dclose);
}

}  // namespace

Handle create_double_dataset(hid_t parent, const std::string& name, const std::vector<hsize_t>& dims,
                             const std::vector<hsize_t>& chunk, const ChunkedStorage& storage) {
  const double fill = std::numeric_limits<double>::quiet_NaN();
  return create_chunked(parent, name, dims, chunk, H5T_IEEE_F64LE, H5T_NATIVE_DOUBLE, &fill, storage);
}

Handle create_int64_dataset(hid_t parent, const std::string& name, const std::vector<hsize_t>& dims,
                            const std::vector<hsize_t>& chunk) {
  // HDF5's default fill (0) rather than a user-set one: netCDF-4 readers turn
  // a user-set fill into _FillValue, and xarray then masks and makes floats.
  return create_chunked(parent, name, dims, chunk, H5T_STD_I64LE, H5T_NATIVE_INT64, nullptr);
}

namespace {

template <class T>
Handle write_plain(hid_t parent, const std::string& name, const std::vector<T>& v, hid_t file_type,
                   hid_t mem_type, bool checksum = true) {
  const hsize_t dims[1] = {v.size()};
  Handle space(check_id(H5Screate_simple(1, dims, nullptr), "make a dataspace"), H5Sclose);
  // One storage chunk with a checksum (an empty dataset stays contiguous:
  // HDF5 refuses chunks of size 0).
  Handle dcpl(check_id(H5Pcreate(H5P_DATASET_CREATE), "make a dataset-creation list"), H5Pclose);
  if (checksum && !v.empty()) {
    check(H5Pset_chunk(dcpl.get(), 1, dims), "set chunking for " + name);
    check(H5Pset_fletcher32(dcpl.get()), "set the Fletcher-32 checksum for " + name);
  }
  Handle d(
      check_id(H5Dcreate2(parent, name.c_str(), file_type, space.get(), H5P_DEFAULT, dcpl.get(), H5P_DEFAULT),
               "create dataset " + name),
      H5Dclose);
  if (!v.empty())
    check(H5Dwrite(d.get(), mem_type, H5S_ALL, H5S_ALL, H5P_DEFAULT, v.data()), "write " + name);
  return d;
}

Handle utf8_string_type() {
  Handle t(check_id(H5Tcopy(H5T_C_S1), "copy the string type"), H5Tclose);
  check(H5Tset_size(t.get(), H5T_VARIABLE), "make a variable-length string type");
  check(H5Tset_cset(t.get(), H5T_CSET_UTF8), "set UTF-8");
  return t;
}

/// A fixed-length, null-terminated UTF-8 string type of `size` bytes (the
/// longest text plus its terminator). Attributes are stored so: their text
/// sits in the object header, not in a global heap, whose reader in HDF5
/// 1.10 loops forever on a damaged collection (an object of size 0 at index
/// 0 never advances its walk); netCDF-4 readers take such attributes as
/// text (NC_CHAR).
Handle fixed_string_type(std::size_t size) {
  Handle t(check_id(H5Tcopy(H5T_C_S1), "copy the string type"), H5Tclose);
  check(H5Tset_size(t.get(), std::max<std::size_t>(size, 1)), "make a fixed-length string type");
  check(H5Tset_strpad(t.get(), H5T_STR_NULLTERM), "set null-terminated strings");
  check(H5Tset_cset(t.get(), H5T_CSET_UTF8), "set UTF-8");
  return t;
}

template <class T>
std::vector<T> read_plain(hid_t parent, const std::string& name, hid_t mem_type) {
  Handle d = open_dataset(parent, name);
  const auto dims = shape(d.get());
  if (dims.size() != 1) throw CubeError("dataset " + name + " is not one-dimensional");
  std::vector<T> out(dims[0]);
  if (!out.empty())
    check(H5Dread(d.get(), mem_type, H5S_ALL, H5S_ALL, H5P_DEFAULT, out.data()), "read " + name);
  return out;
}

}  // namespace

Handle write_vector(hid_t parent, const std::string& name, const std::vector<double>& v) {
  return write_plain(parent, name, v, H5T_IEEE_F64LE, H5T_NATIVE_DOUBLE);
}
Handle write_vector(hid_t parent, const std::string& name, const std::vector<std::int64_t>& v) {
  return write_plain(parent, name, v, H5T_STD_I64LE, H5T_NATIVE_INT64);
}
Handle write_vector(hid_t parent, const std::string& name, const std::vector<std::uint8_t>& v) {
  return write_plain(parent, name, v, H5T_STD_U8LE, H5T_NATIVE_UINT8);
}
Handle write_vector(hid_t parent, const std::string& name, const std::vector<std::string>& v) {
  std::vector<const char*> ptrs;
  for (const auto& s : v) ptrs.push_back(s.c_str());
  Handle type = utf8_string_type();
  // HDF5 applies no filter to variable-length data ("not suitable for
  // filters"), so strings go without a checksum; the cube reader checks its
  // string axes by comparing the copies in the metric groups.
  return write_plain(parent, name, ptrs, type.get(), type.get(), false);
}

std::vector<hsize_t> shape(hid_t dataset) {
  Handle space(check_id(H5Dget_space(dataset), "get a dataspace"), H5Sclose);
  const int rank = H5Sget_simple_extent_ndims(space.get());
  if (rank < 0) throw CubeError("HDF5: cannot read a dataset's rank");
  std::vector<hsize_t> dims(static_cast<std::size_t>(rank));
  check(H5Sget_simple_extent_dims(space.get(), dims.data(), nullptr), "read a dataset's shape");
  return dims;
}

namespace {}  // namespace

/// Refuses a read of a chunked dataset's block when a chunk under it is not
/// stored. HDF5 returns the fill value for a chunk its index does not list,
/// with no error, so a damaged chunk index would otherwise read as NaN
/// results (a zeroed block of a shard merged "cleanly" into NaN summaries).
/// A shard stores every chunk of the chunks it computed, so there a missing
/// one is damage.
void require_stored(hid_t dataset, const std::vector<hsize_t>& start, const std::vector<hsize_t>& count) {
  Handle plist(check_id(H5Dget_create_plist(dataset), "get a dataset's creation properties"), H5Pclose);
  if (H5Pget_layout(plist.get()) != H5D_CHUNKED) return;
  const int rank = static_cast<int>(start.size());
  std::vector<hsize_t> dims(start.size());
  if (H5Pget_chunk(plist.get(), rank, dims.data()) != rank)
    throw CubeError("cannot read a dataset's chunk shape");
  std::vector<hsize_t> first(start.size()), last(start.size()), at(start.size());
  for (std::size_t i = 0; i < start.size(); ++i) {
    if (count[i] == 0) return;
    first[i] = start[i] / dims[i];
    last[i] = (start[i] + count[i] - 1) / dims[i];
  }
  std::vector<hsize_t> index = first;
  while (true) {
    for (std::size_t i = 0; i < index.size(); ++i) at[i] = index[i] * dims[i];
    hsize_t size = 0;
    if (H5Dget_chunk_storage_size(dataset, at.data(), &size) < 0 || size == 0)
      throw CubeError("a chunk of it is not stored (its chunk index is damaged or the file was cut short)");
    std::size_t d = index.size();
    while (d > 0) {
      --d;
      if (index[d] < last[d]) {
        ++index[d];
        break;
      }
      index[d] = first[d];
      if (d == 0) return;
    }
  }
}

namespace {

void block_io(hid_t dataset, const std::vector<hsize_t>& start, const std::vector<hsize_t>& count,
              hid_t mem_type, void* data, bool write) {
  Handle file_space(check_id(H5Dget_space(dataset), "get a dataspace"), H5Sclose);
  check(H5Sselect_hyperslab(file_space.get(), H5S_SELECT_SET, start.data(), nullptr, count.data(), nullptr),
        "select a block");
  Handle mem_space(check_id(H5Screate_simple(static_cast<int>(count.size()), count.data(), nullptr),
                            "make a memory dataspace"),
                   H5Sclose);
  if (write)
    check(H5Dwrite(dataset, mem_type, mem_space.get(), file_space.get(), H5P_DEFAULT, data), "write a block");
  else
    check(H5Dread(dataset, mem_type, mem_space.get(), file_space.get(), H5P_DEFAULT, data), "read a block");
}
}  // namespace

void write_block(hid_t dataset, const std::vector<hsize_t>& start, const std::vector<hsize_t>& count,
                 const double* data) {
  block_io(dataset, start, count, H5T_NATIVE_DOUBLE, const_cast<double*>(data), true);
}
std::uint32_t fletcher32(const void* data, std::size_t size) {
  // HDF5's sums, per block of at most 360 words (the most that cannot
  // overflow 32 bits): sum1 += w_i and sum2 += sum1 after each word, that is
  // sum2 += t * sum1 + sum over i of (t - i) w_i for a block of t words.
  const auto* bytes = static_cast<const std::uint8_t*>(data);
  std::size_t words = size / 2;
  std::uint32_t sum1 = 0, sum2 = 0;
  while (words > 0) {
    const std::uint32_t t = static_cast<std::uint32_t>(std::min<std::size_t>(words, 360));
    std::uint32_t plain = 0, weighted = 0;
    for (std::uint32_t i = 0; i < t; ++i) {
      const std::uint32_t w = (static_cast<std::uint32_t>(bytes[2 * i]) << 8) | bytes[2 * i + 1];
      plain += w;
      weighted += (t - i) * w;
    }
    sum2 += t * sum1 + weighted;
    sum1 += plain;
    sum1 = (sum1 & 0xffff) + (sum1 >> 16);
    sum2 = (sum2 & 0xffff) + (sum2 >> 16);
    bytes += 2 * t;
    words -= t;
  }
  if (size % 2 != 0) {
    sum1 += static_cast<std::uint32_t>(*bytes) << 8;
    sum2 += sum1;
    sum1 = (sum1 & 0xffff) + (sum1 >> 16);
    sum2 = (sum2 & 0xffff) + (sum2 >> 16);
  }
  sum1 = (sum1 & 0xffff) + (sum1 >> 16);
  sum2 = (sum2 & 0xffff) + (sum2 >> 16);
  return (sum2 << 16) | sum1;
}

bool takes_whole_chunks(hid_t dataset) {
  if constexpr (std::endian::native != std::endian::little) return false;
  Handle type(check_id(H5Dget_type(dataset), "get a dataset's type"), H5Tclose);
  if (H5Tequal(type.get(), H5T_IEEE_F64LE) <= 0) return false;
  Handle dcpl(check_id(H5Dget_create_plist(dataset), "get a dataset's creation list"), H5Pclose);
  if (H5Pget_nfilters(dcpl.get()) != 1) return false;
  unsigned flags = 0;
  std::size_t values = 0;
  unsigned config = 0;
  return H5Pget_filter2(dcpl.get(), 0, &flags, &values, nullptr, 0, nullptr, &config) ==
         H5Z_FILTER_FLETCHER32;
}

void write_whole_chunks(hid_t dataset, const std::vector<hsize_t>& chunk, const std::vector<hsize_t>& start,
                        const std::vector<hsize_t>& count, const double* data, bool direct) {
  const std::size_t rank = chunk.size();
  if (start.size() != rank || count.size() != rank || rank == 0)
    throw std::logic_error("internal: write_whole_chunks given blocks of another rank");
  for (std::size_t d = 0; d < rank; ++d)
    if (chunk[d] == 0 || start[d] % chunk[d] != 0)
      throw std::logic_error("internal: write_whole_chunks given a block that does not start a chunk");
  if (!direct) {
    write_block(dataset, start, count, data);
    return;
  }
  // Strides of the block in memory and of a chunk, in elements.
  std::vector<std::size_t> block_stride(rank, 1), chunk_stride(rank, 1), grid(rank), at(rank, 0);
  for (std::size_t d = rank - 1; d > 0; --d) {
    block_stride[d - 1] = block_stride[d] * count[d];
    chunk_stride[d - 1] = chunk_stride[d] * chunk[d];
  }
  for (std::size_t d = 0; d < rank; ++d) grid[d] = (count[d] + chunk[d] - 1) / chunk[d];
  for (std::size_t d = 0; d < rank; ++d)
    if (grid[d] == 0) return;
  const std::size_t elements = chunk_stride[0] * chunk[0], bytes = elements * sizeof(double);
  thread_local std::vector<double> buffer;
  buffer.resize(elements + 1);  // the checksum's 4 bytes fit in the extra element
  std::vector<hsize_t> offset(rank);
  std::vector<std::size_t> extent(rank), e(rank);
  for (;;) {
    // This chunk: where it starts in the block and how much of it the block fills.
    std::fill(buffer.begin(), buffer.begin() + static_cast<std::ptrdiff_t>(elements),
              std::numeric_limits<double>::quiet_NaN());
    for (std::size_t d = 0; d < rank; ++d) {
      offset[d] = start[d] + at[d] * chunk[d];
      extent[d] = std::min<std::size_t>(chunk[d], count[d] - at[d] * chunk[d]);
    }
    // Rows along the last dimension, over every index of the others.
    std::fill(e.begin(), e.end(), 0);
    for (;;) {
      std::size_t from = 0, to = 0;
      for (std::size_t d = 0; d < rank; ++d) {
        from += (at[d] * chunk[d] + e[d]) * block_stride[d];
        to += e[d] * chunk_stride[d];
      }
      std::memcpy(buffer.data() + to, data + from, extent[rank - 1] * sizeof(double));
      std::size_t d = rank - 1;
      while (d > 0 && ++e[d - 1] == extent[d - 1]) e[--d] = 0;
      if (d == 0) break;
    }
    const std::uint32_t sum = fletcher32(buffer.data(), bytes);
    auto* tail = reinterpret_cast<unsigned char*>(buffer.data()) + bytes;
    for (int b = 0; b < 4; ++b)
      tail[b] = static_cast<unsigned char>(sum >> (8 * b));  // little-endian, as HDF5 stores it
    check(H5Dwrite_chunk(dataset, H5P_DEFAULT, 0, offset.data(), bytes + 4, buffer.data()), "write a chunk");
    // The next chunk of the block.
    std::size_t d = rank;
    while (d > 0 && ++at[d - 1] == grid[d - 1]) at[--d] = 0;
    if (d == 0) return;
  }
}

void read_block(hid_t dataset, const std::vector<hsize_t>& start, const std::vector<hsize_t>& count,
                double* data) {
  block_io(dataset, start, count, H5T_NATIVE_DOUBLE, data, false);
}
void write_block_i64(hid_t dataset, const std::vector<hsize_t>& start, const std::vector<hsize_t>& count,
                     const std::int64_t* data) {
  block_io(dataset, start, count, H5T_NATIVE_INT64, const_cast<std::int64_t*>(data), true);
}
void write_block_u8(hid_t dataset, const std::vector<hsize_t>& start, const std::vector<hsize_t>& count,
                    const std::uint8_t* data) {
  block_io(dataset, start, count, H5T_NATIVE_UINT8, const_cast<std::uint8_t*>(data), true);
}

std::vector<double> read_doubles(hid_t parent, const std::string& name) {
  return read_plain<double>(parent, name, H5T_NATIVE_DOUBLE);
}
std::vector<std::int64_t> read_int64s(hid_t parent, const std::string& name) {
  return read_plain<std::int64_t>(parent, name, H5T_NATIVE_INT64);
}
std::vector<std::uint8_t> read_u8s(hid_t parent, const std::string& name) {
  return read_plain<std::uint8_t>(parent, name, H5T_NATIVE_UINT8);
}
namespace {

/// Reads `size` bytes at `offset` of an open descriptor; false when the file
/// ends before.
bool read_exactly(int fd, std::uint64_t offset, std::size_t size, unsigned char* out) {
  while (size > 0) {
    const ssize_t k = ::pread(fd, out, size, static_cast<off_t>(offset));
    if (k < 0 && errno == EINTR) continue;
    if (k <= 0) return false;
    out += k;
    size -= static_cast<std::size_t>(k);
    offset += static_cast<std::uint64_t>(k);
  }
  return true;
}

std::uint64_t little_endian(const unsigned char* p, std::size_t bytes) {
  std::uint64_t v = 0;
  for (std::size_t i = bytes; i-- > 0;) v = (v << 8) | p[i];
  return v;
}

/// Proves that every string of a variable-length string dataset can be read
/// without HDF5 looping (see fixed_string_type): the dataset's stored
/// elements (length, collection address, index) are read from the file, and
/// each global-heap collection they name is walked here with bounds, as
/// HDF5 1.10's H5HG__cache_heap_deserialize walks it, refusing what would
/// stall that walk (an object that does not advance it) or run off the
/// collection or the file. Throws CubeError on damage. Written here because
/// HDF5 offers no bounded way to read such data: the format is HDF5's own
/// (File Format Specification 2.0, sections III.E "Global Heap" and
/// "Disk Format: Level 2A1"), read with pread only.
void check_global_heap(hid_t dataset, const std::string& name, hsize_t count) {
  const haddr_t data = H5Dget_offset(dataset);
  if (data == HADDR_UNDEF) throw CubeError("dataset " + name + " is not stored as one contiguous block");
  Handle file(check_id(H5Iget_file_id(dataset), "get the file of " + name), H5Fclose);
  Handle fcpl(check_id(H5Fget_create_plist(file.get()), "get the creation list"), H5Pclose);
  std::size_t sizeof_addr = 0, sizeof_size = 0;
  check(H5Pget_sizes(fcpl.get(), &sizeof_addr, &sizeof_size), "read the file's address size");
  if (sizeof_addr != 8 || sizeof_size != 8)
    throw CubeError(fmt::format("the file uses {}-byte addresses; covergrid writes 8", sizeof_addr));
  const ssize_t name_size = H5Fget_name(file.get(), nullptr, 0);
  if (name_size <= 0) throw CubeError("cannot read the file name of " + name);
  std::string path(static_cast<std::size_t>(name_size) + 1, '\0');
  H5Fget_name(file.get(), path.data(), path.size());
  path.resize(static_cast<std::size_t>(name_size));
  const int fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) throw CubeError(fmt::format("cannot open {}: {}", path, std::strerror(errno)));
  struct Closer {
    int fd;
    ~Closer() { ::close(fd); }
  } closer{fd};
  struct stat st {};
  if (::fstat(fd, &st) != 0) throw CubeError("cannot read the size of " + path);
  const std::uint64_t file_size = static_cast<std::uint64_t>(st.st_size);

  // One stored element: 4-byte length, 8-byte collection address, 4-byte index.
  constexpr std::size_t element = 16;
  if (count > (file_size / element))
    throw CubeError("dataset " + name + " declares more strings than the file holds");
  std::vector<unsigned char> elements(static_cast<std::size_t>(count) * element);
  if (!read_exactly(fd, data, elements.size(), elements.data()))
    throw CubeError("dataset " + name + " runs past the end of the file");

  // Collection address -> (index -> object size), each collection walked once.
  std::map<std::uint64_t, std::map<std::uint64_t, std::uint64_t>> collections;
  constexpr std::uint64_t header = 16, object_header = 16, max_collection = std::uint64_t{1} << 26;
  for (hsize_t i = 0; i < count; ++i) {
    const unsigned char* e = elements.data() + i * element;
    const std::uint64_t length = little_endian(e, 4), address = little_endian(e + 4, 8),
                        index = little_endian(e + 12, 4);
    if (length == 0 && address == 0) continue;  // an empty (null) string: no heap object
    auto found = collections.find(address);
    if (found == collections.end()) {
      unsigned char head[header];
      if (address > file_size || !read_exactly(fd, address, header, head))
        throw CubeError(fmt::format("dataset {}: string {} points past the end of the file", name, i));
      const std::uint64_t size = little_endian(head + 8, 8);
      if (std::memcmp(head, "GCOL", 4) != 0 || head[4] != 1 || size < header || size > max_collection ||
          size > file_size - address)
        throw CubeError(fmt::format("dataset {}: the global heap holding string {} is damaged", name, i));
      std::vector<unsigned char> heap(static_cast<std::size_t>(size));
      if (!read_exactly(fd, address, heap.size(), heap.data()))
        throw CubeError(fmt::format("dataset {}: the global heap holding string {} is cut short", name, i));
      std::map<std::uint64_t, std::uint64_t> objects;
      std::uint64_t at = header;
      while (at < size) {
        if (size - at < object_header) break;  // too small for an object: free space
        const std::uint64_t id = little_endian(&heap[at], 2), bytes = little_endian(&heap[at + 8], 8);
        // HDF5 advances by the free-space object's size (index 0) or by the
        // header plus the size rounded up to 8; zero never advances.
        const std::uint64_t need =
            id == 0 ? bytes : (bytes > size ? size : object_header + ((bytes + 7) & ~7ull));
        if (need == 0 || need > size - at)
          throw CubeError(fmt::format("dataset {}: the global heap holding string {} is damaged", name, i));
        if (id != 0) objects[id] = bytes;
        at += need;
      }
      found = collections.emplace(address, std::move(objects)).first;
    }
    const auto object = found->second.find(index);
    if (object == found->second.end() || object->second < length)
      throw CubeError(fmt::format("dataset {}: string {} is missing from its global heap", name, i));
  }
}

}  // namespace

std::vector<std::string> read_strings(hid_t parent, const std::string& name) {
  Handle d = open_dataset(parent, name);
  const auto dims = shape(d.get());
  if (dims.size() != 1) throw CubeError("dataset " + name + " is not one-dimensional");
  Handle ftype(check_id(H5Dget_type(d.get()), "get the type of " + name), H5Tclose);
  if (H5Tget_class(ftype.get()) != H5T_STRING || H5Tis_variable_str(ftype.get()) <= 0)
    throw CubeError("dataset " + name + " does not hold variable-length text");
  if (dims[0] > 0) check_global_heap(d.get(), name, dims[0]);
  Handle type = utf8_string_type();
  std::vector<char*> raw(dims[0], nullptr);
  if (!raw.empty())
    check(H5Dread(d.get(), type.get(), H5S_ALL, H5S_ALL, H5P_DEFAULT, raw.data()), "read " + name);
  std::vector<std::string> out;
  for (char* s : raw) out.emplace_back(s ? s : "");
  if (!raw.empty()) {
    Handle space(check_id(H5Dget_space(d.get()), "get a dataspace"), H5Sclose);
    H5Dvlen_reclaim(type.get(), space.get(), H5P_DEFAULT, raw.data());
  }
  return out;
}

void read_every_chunk(hid_t dataset, const std::string& name) {
  const auto dims = shape(dataset);
  const std::size_t rank = dims.size();
  hsize_t total = 1;
  for (auto v : dims) total *= v;
  if (total == 0) return;
  Handle dcpl(check_id(H5Dget_create_plist(dataset), "get the creation list of " + name), H5Pclose);
  std::vector<hsize_t> chunk = dims;
  if (H5Pget_layout(dcpl.get()) == H5D_CHUNKED)
    check(H5Pget_chunk(dcpl.get(), static_cast<int>(rank), chunk.data()), "get the chunk shape of " + name);
  Handle ftype(check_id(H5Dget_type(dataset), "get the type of " + name), H5Tclose);
  const bool vlen_string = H5Tis_variable_str(ftype.get()) > 0;
  if (vlen_string) {
    if (rank != 1) throw CubeError("dataset " + name + " holds text but is not one-dimensional");
    check_global_heap(dataset, name, dims[0]);
  }
  Handle mtype = vlen_string ? utf8_string_type()
                             : Handle(check_id(H5Tget_native_type(ftype.get(), H5T_DIR_DEFAULT),
                                               "get the memory type of " + name),
                                      H5Tclose);
  const std::size_t item = vlen_string ? sizeof(char*) : H5Tget_size(mtype.get());
  std::size_t per_chunk = 1;
  for (auto v : chunk) per_chunk *= v;
  if (per_chunk > max_chunk_elements)
    throw CubeError(
        fmt::format("dataset {} declares storage chunks of {} elements; covergrid writes at most {}", name,
                    per_chunk, max_chunk_elements));
  std::vector<unsigned char> buf(per_chunk * item);
  Handle file_space(check_id(H5Dget_space(dataset), "get a dataspace"), H5Sclose);
  // Odometer over the chunk grid, last dimension fastest.
  std::vector<hsize_t> start(rank, 0), count(rank);
  for (;;) {
    for (std::size_t i = 0; i < rank; ++i) count[i] = std::min(chunk[i], dims[i] - start[i]);
    check(H5Sselect_hyperslab(file_space.get(), H5S_SELECT_SET, start.data(), nullptr, count.data(), nullptr),
          "select a chunk of " + name);
    Handle mem_space(
        check_id(H5Screate_simple(static_cast<int>(rank), count.data(), nullptr), "make a memory dataspace"),
        H5Sclose);
    check(H5Dread(dataset, mtype.get(), mem_space.get(), file_space.get(), H5P_DEFAULT, buf.data()),
          "read " + name);
    if (vlen_string) H5Dvlen_reclaim(mtype.get(), mem_space.get(), H5P_DEFAULT, buf.data());
    if (rank == 0) return;
    std::size_t i = rank;
    while (i > 0) {
      --i;
      start[i] += chunk[i];
      if (start[i] < dims[i]) break;
      start[i] = 0;
      if (i == 0) return;
    }
  }
}

namespace {

/// Adds the datasets under `group` (named `prefix`) to `out`, walking only
/// what covergrid writes: hard links kept in the group's object header
/// (compact storage, under its checksum), groups nested at most a few
/// deep. A group whose links sit in dense storage (a fractal heap whose
/// blocks carry no checksum: a damaged one made HDF5 1.10's own walk free a
/// wild pointer), a soft or external link, or a deeper nesting is refused
/// before HDF5 follows it.
void collect_datasets(hid_t group, const std::string& prefix, int depth, std::vector<std::string>& out) {
  const std::string here = prefix.empty() ? "/" : prefix;
  if (depth > 4) throw CubeError("groups are nested deeper than a cube's, at " + here);
  H5G_info_t info;
  check(H5Gget_info(group, &info), "read the links of group " + here);
  if (info.nlinks > 0 && info.storage_type != H5G_STORAGE_TYPE_COMPACT)
    throw CubeError("group " + here + " keeps its links in a form covergrid does not write (not compact)");
  for (hsize_t i = 0; i < info.nlinks; ++i) {
    char name[1024];
    const ssize_t len =
        H5Lget_name_by_idx(group, ".", H5_INDEX_NAME, H5_ITER_INC, i, name, sizeof name, H5P_DEFAULT);
    if (len < 0 || static_cast<std::size_t>(len) >= sizeof name)
      throw CubeError("cannot read a link name in group " + here);
    H5L_info_t link;
    check(H5Lget_info(group, name, &link, H5P_DEFAULT), "read link " + prefix + "/" + name);
    if (link.type != H5L_TYPE_HARD)
      throw CubeError("group " + here + " holds a soft or external link, " + name +
                      ", which a cube never has");
    H5O_info_t object;
    check(H5Oget_info_by_name2(group, name, &object, H5O_INFO_BASIC, H5P_DEFAULT),
          "read object " + prefix + "/" + name);
    const std::string path = prefix + "/" + name;
    if (object.type == H5O_TYPE_DATASET) {
      out.push_back(path);
    } else if (object.type == H5O_TYPE_GROUP) {
      Handle g = open_group(group, name);
      collect_datasets(g.get(), path, depth + 1, out);
    }
  }
}

}  // namespace

std::vector<std::string> dataset_paths(hid_t file) {
  std::vector<std::string> out;
  collect_datasets(file, "", 0, out);
  return out;
}

namespace {
Handle scalar_space() { return Handle(check_id(H5Screate(H5S_SCALAR), "make a scalar dataspace"), H5Sclose); }

void replace_attr(hid_t obj, const std::string& name) {
  if (H5Aexists(obj, name.c_str()) > 0) check(H5Adelete(obj, name.c_str()), "replace attribute " + name);
}
}  // namespace

void set_attr(hid_t obj, const std::string& name, const std::string& value) {
  replace_attr(obj, name);
  Handle type = fixed_string_type(value.size() + 1);
  Handle space = scalar_space();
  Handle a(check_id(H5Acreate2(obj, name.c_str(), type.get(), space.get(), H5P_DEFAULT, H5P_DEFAULT),
                    "create attribute " + name),
           H5Aclose);
  check(H5Awrite(a.get(), type.get(), value.c_str()), "write attribute " + name);
}

void set_attr(hid_t obj, const std::string& name, std::int64_t value) {
  replace_attr(obj, name);
  Handle space = scalar_space();
  Handle a(check_id(H5Acreate2(obj, name.c_str(), H5T_STD_I64LE, space.get(), H5P_DEFAULT, H5P_DEFAULT),
                    "create attribute " + name),
           H5Aclose);
  check(H5Awrite(a.get(), H5T_NATIVE_INT64, &value), "write attribute " + name);
}

void set_attr(hid_t obj, const std::string& name, double value) {
  replace_attr(obj, name);
  Handle space = scalar_space();
  Handle a(check_id(H5Acreate2(obj, name.c_str(), H5T_IEEE_F64LE, space.get(), H5P_DEFAULT, H5P_DEFAULT),
                    "create attribute " + name),
           H5Aclose);
  check(H5Awrite(a.get(), H5T_NATIVE_DOUBLE, &value), "write attribute " + name);
}

void set_attr(hid_t obj, const std::string& name, const std::vector<std::string>& values) {
  replace_attr(obj, name);
  std::size_t width = 1;
  for (const auto& v : values) width = std::max(width, v.size() + 1);
  Handle type = fixed_string_type(width);
  const hsize_t dims[1] = {values.size()};
  Handle space(check_id(H5Screate_simple(1, dims, nullptr), "make a dataspace"), H5Sclose);
  Handle a(check_id(H5Acreate2(obj, name.c_str(), type.get(), space.get(), H5P_DEFAULT, H5P_DEFAULT),
                    "create attribute " + name),
           H5Aclose);
  std::string packed(width * values.size(), '\0');
  for (std::size_t i = 0; i < values.size(); ++i) values[i].copy(packed.data() + i * width, values[i].size());
  check(H5Awrite(a.get(), type.get(), packed.data()), "write attribute " + name);
}

bool has_attr(hid_t obj, const std::string& name) { return H5Aexists(obj, name.c_str()) > 0; }

std::string get_attr_string(hid_t obj, const std::string& name) {
  Handle a(check_id(H5Aopen(obj, name.c_str(), H5P_DEFAULT), "open attribute " + name), H5Aclose);
  Handle ftype(check_id(H5Aget_type(a.get()), "get the type of attribute " + name), H5Tclose);
  if (H5Tget_class(ftype.get()) != H5T_STRING) throw CubeError("attribute " + name + " is not a string");
  // A variable-length string's text lies in a global heap, which HDF5 1.10
  // may walk forever when damaged: such an attribute is never read (the
  // cube formats up to 2 wrote them; this one writes fixed-length text).
  if (H5Tis_variable_str(ftype.get()) > 0)
    throw CubeError("attribute " + name + " is a variable-length string (cube format 2 or older)");
  const std::size_t size = H5Tget_size(ftype.get());
  if (size == 0 || size > max_attribute_text)
    throw CubeError(fmt::format("attribute {} declares {} bytes of text", name, size));
  Handle space(check_id(H5Aget_space(a.get()), "get the dataspace of attribute " + name), H5Sclose);
  if (H5Sget_simple_extent_npoints(space.get()) != 1)
    throw CubeError("attribute " + name + " is not a single text");
  std::string out(size, '\0');
  check(H5Aread(a.get(), ftype.get(), out.data()), "read attribute " + name);
  return out.substr(0, out.find('\0'));
}

std::int64_t get_attr_int(hid_t obj, const std::string& name) {
  Handle a(check_id(H5Aopen(obj, name.c_str(), H5P_DEFAULT), "open attribute " + name), H5Aclose);
  std::int64_t v = 0;
  check(H5Aread(a.get(), H5T_NATIVE_INT64, &v), "read attribute " + name);
  return v;
}

double get_attr_double(hid_t obj, const std::string& name) {
  Handle a(check_id(H5Aopen(obj, name.c_str(), H5P_DEFAULT), "open attribute " + name), H5Aclose);
  double v = 0;
  check(H5Aread(a.get(), H5T_NATIVE_DOUBLE, &v), "read attribute " + name);
  return v;
}

void make_scale(hid_t scale, const std::string& name) {
  check(H5DSset_scale(scale, name.c_str()), "make " + name + " a dimension scale");
}

void attach_scale(hid_t dataset, hid_t scale, unsigned dim, const std::string& label) {
  check(H5DSattach_scale(dataset, scale, dim), "attach scale " + label);
  check(H5DSset_label(dataset, dim, label.c_str()), "label dimension " + label);
}

}  // namespace covergrid::output
