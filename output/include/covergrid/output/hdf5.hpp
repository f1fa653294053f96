#pragma once
/// A small RAII layer over the HDF5 C API: every handle is closed by its
/// destructor and every call's status is checked (a failure throws CubeError
/// naming the file and the operation). Only what the cube needs.
#include <hdf5.h>

#include <cstdint>
#include <stdexcept>
#include <string>
#include <vector>

namespace covergrid::output {

/// A cube file that cannot be read, written or understood.
class CubeError : public std::runtime_error {
 public:
  using std::runtime_error::runtime_error;
};

/// A write refused for want of space: the file system is full (ENOSPC), a
/// quota is reached (EDQUOT) or the file-size limit (EFBIG, ulimit -f). The
/// user's environment, not a fault: the callers turn it into an InputError
/// naming the file (exit 2) and keep what can be resumed.
class OutOfSpace : public CubeError {
 public:
  using CubeError::CubeError;
};
/// True for the errno values OutOfSpace stands for.
bool out_of_space_errno(int error);
/// The one wording of that condition in messages.
inline constexpr const char* out_of_space_text =
    "No space left on device (the file system is full, or a quota or the file-size limit is reached)";

/// Silences HDF5's own error printing; we report errors ourselves.
void quiet_hdf5_errors();

class Handle {
 public:
  using Closer = herr_t (*)(hid_t);
  Handle() = default;
  Handle(hid_t id, Closer closer) : id_(id), closer_(closer) {}
  Handle(Handle&& o) noexcept : id_(o.id_), closer_(o.closer_) { o.id_ = H5I_INVALID_HID; }
  Handle& operator=(Handle&& o) noexcept {
    if (this != &o) {
      reset();
      id_ = o.id_;
      closer_ = o.closer_;
      o.id_ = H5I_INVALID_HID;
    }
    return *this;
  }
  Handle(const Handle&) = delete;
  Handle& operator=(const Handle&) = delete;
  ~Handle() { reset(); }
  hid_t get() const { return id_; }
  explicit operator bool() const { return id_ >= 0; }
  void reset() {
    if (id_ >= 0 && closer_) closer_(id_);
    id_ = H5I_INVALID_HID;
  }

 private:
  hid_t id_ = H5I_INVALID_HID;
  Closer closer_ = nullptr;
};

/// Throws CubeError(context + what) when status < 0; returns the value. The
/// message ends with HDF5's own innermost reason when it gave one (e.g. "data
/// error detected by Fletcher32 checksum").
hid_t check_id(hid_t id, const std::string& what);
void check(herr_t status, const std::string& what);
/// True when a CubeError's message says a storage chunk failed its checksum.
bool is_checksum_failure(const CubeError& e);

class File {
 public:
  static File create(const std::string& path);  // truncates
  static File open(const std::string& path, bool writable);
  hid_t id() const { return h_.get(); }
  const std::string& path() const { return path_; }
  void flush() const;
  void close() { h_.reset(); }

 private:
  Handle h_;
  std::string path_;
};

// Groups and datasets by path inside a file or group.
Handle create_group(hid_t parent, const std::string& name);
Handle open_group(hid_t parent, const std::string& name);
bool exists(hid_t parent, const std::string& path);
Handle open_dataset(hid_t parent, const std::string& name);

/// How a chunked dataset is stored: every storage chunk guarded by a
/// Fletcher-32 checksum (HDF5 verifies it on every read and fails the read
/// of a damaged chunk); shuffled and deflated when `compress`; with a raw
/// chunk cache of `cache_bytes` (0: none) when writes fill a storage chunk
/// in several pieces, so that each chunk is filtered once.
struct ChunkedStorage {
  bool compress = true;
  std::size_t cache_bytes = 0;
};

/// A chunked float64 dataset filled with NaN, stored as `storage` says.
Handle create_double_dataset(hid_t parent, const std::string& name, const std::vector<hsize_t>& dims,
                             const std::vector<hsize_t>& chunk, const ChunkedStorage& storage = {});
/// The same for int64 values (HDF5's default fill value, 0).
Handle create_int64_dataset(hid_t parent, const std::string& name, const std::vector<hsize_t>& dims,
                            const std::vector<hsize_t>& chunk);
/// A 1-D dataset of doubles / int64 / uint8 / UTF-8 strings, written at once
/// (numbers: one storage chunk with a Fletcher-32 checksum when not empty;
/// variable-length strings: contiguous, as HDF5 filters no such data).
Handle write_vector(hid_t parent, const std::string& name, const std::vector<double>& v);
Handle write_vector(hid_t parent, const std::string& name, const std::vector<std::int64_t>& v);
Handle write_vector(hid_t parent, const std::string& name, const std::vector<std::uint8_t>& v);
Handle write_vector(hid_t parent, const std::string& name, const std::vector<std::string>& v);

/// Dataset shape.
std::vector<hsize_t> shape(hid_t dataset);
/// Hyperslab I/O of doubles (start/count per dimension, data in C order).
void write_block(hid_t dataset, const std::vector<hsize_t>& start, const std::vector<hsize_t>& count,
                 const double* data);
/// write_block for a block of whole storage chunks (its start a multiple of
/// `chunk` in every dimension; the block may end inside the dataset's last
/// chunks) of a double dataset whose only filter is Fletcher-32: each
/// storage chunk is laid out here (the fill value where the block does not
/// reach), checksummed here (fletcher32) and handed to HDF5 whole
/// (H5Dwrite_chunk). The stored bytes are what write_block stores; HDF5's
/// own write path spent most of the assembly copying and checksumming
/// (`scripts/bench whole`). `direct` says takes_whole_chunks(dataset) (asked
/// once per dataset: it costs a property list); false goes to write_block.
void write_whole_chunks(hid_t dataset, const std::vector<hsize_t>& chunk, const std::vector<hsize_t>& start,
                        const std::vector<hsize_t>& count, const double* data, bool direct);
/// True for a float64 (little-endian) dataset whose only filter is
/// Fletcher-32, on a little-endian machine: write_whole_chunks can lay out
/// its chunks.
bool takes_whole_chunks(hid_t dataset);
/// HDF5's Fletcher-32 of `size` bytes, bit for bit as its filter computes it
/// (16-bit big-endian words, folded every 360 words), summed a block of 360
/// words at a time so that the compiler can vectorise it.
std::uint32_t fletcher32(const void* data, std::size_t size);
/// Throws CubeError unless every chunk of a chunked dataset under the block
/// is stored: HDF5 reads a chunk missing from a damaged index as the fill
/// value, silently. For blocks that must have been written (merge).
void require_stored(hid_t dataset, const std::vector<hsize_t>& start, const std::vector<hsize_t>& count);
void read_block(hid_t dataset, const std::vector<hsize_t>& start, const std::vector<hsize_t>& count,
                double* data);
void write_block_i64(hid_t dataset, const std::vector<hsize_t>& start, const std::vector<hsize_t>& count,
                     const std::int64_t* data);
void write_block_u8(hid_t dataset, const std::vector<hsize_t>& start, const std::vector<hsize_t>& count,
                    const std::uint8_t* data);

std::vector<double> read_doubles(hid_t parent, const std::string& name);
std::vector<std::int64_t> read_int64s(hid_t parent, const std::string& name);
std::vector<std::uint8_t> read_u8s(hid_t parent, const std::string& name);
std::vector<std::string> read_strings(hid_t parent, const std::string& name);

/// Reads every storage chunk of a dataset (one chunk at a time, so memory
/// stays at one chunk), which makes HDF5 verify each chunk's checksum;
/// throws CubeError at the first chunk that cannot be read.
void read_every_chunk(hid_t dataset, const std::string& name);
/// The paths of every dataset in the file, in name order ("/exact/coverage").
std::vector<std::string> dataset_paths(hid_t file);

/// The most elements a storage chunk of a cube may hold when it is read
/// (covergrid writes at most a plan chunk's 2048 cells, or a whole 1-D
/// axis of at most 10^7 values): a damaged declaration cannot make a read
/// allocate more.
inline constexpr std::size_t max_chunk_elements = std::size_t{1} << 24;

/// The longest text attribute a reader accepts (bytes): a scenario text of
/// more than this is refused, and a damaged size cannot make a read allocate.
inline constexpr std::size_t max_attribute_text = std::size_t{1} << 24;

// Attributes on any object. Text attributes are written as fixed-length
// UTF-8 strings; a variable-length one is refused when read (CubeError).
void set_attr(hid_t obj, const std::string& name, const std::string& value);
void set_attr(hid_t obj, const std::string& name, std::int64_t value);
void set_attr(hid_t obj, const std::string& name, double value);
void set_attr(hid_t obj, const std::string& name, const std::vector<std::string>& values);
bool has_attr(hid_t obj, const std::string& name);
std::string get_attr_string(hid_t obj, const std::string& name);
std::int64_t get_attr_int(hid_t obj, const std::string& name);
double get_attr_double(hid_t obj, const std::string& name);

/// Makes `scale` a dimension scale named `name` and attaches it to dimension
/// `dim` of `dataset`, labelling that dimension with the same name.
void make_scale(hid_t scale, const std::string& name);
void attach_scale(hid_t dataset, hid_t scale, unsigned dim, const std::string& label);

}  // namespace covergrid::output
