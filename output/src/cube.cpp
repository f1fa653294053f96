#include "covergrid/output/cube.hpp"

#include "covergrid/engine/output_location.hpp"
#include "covergrid/engine/random.hpp"
#include "covergrid/engine/error.hpp"
#include "covergrid/engine/sha256.hpp"
#include "covergrid/methods/registry.hpp"
#include "covergrid/version.hpp"

#include <fmt/format.h>

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <cmath>
#include <chrono>
#include <cstdio>
#include <cstring>
#include <ctime>
#include <filesystem>
#include <optional>
#include <set>
#include <string_view>

namespace covergrid::output {

namespace fs = std::filesystem;
using engine::Metric;
using engine::Stat;

std::string partial_path(const std::string& cube_path) { return cube_path + ".partial"; }

namespace {

std::string utc_now() {
  const std::time_t t = std::chrono::system_clock::to_time_t(std::chrono::system_clock::now());
  std::tm tm{};
  gmtime_r(&t, &tm);
  char buf[32];
  std::strftime(buf, sizeof buf, "%Y-%m-%dT%H:%M:%SZ", &tm);
  return buf;
}

/// Whether `name` ("/group/dataset") is a dataset of the cube layout.
/// The names of an object's attributes.
std::vector<std::string> attribute_names(hid_t object) {
  H5O_info_t oinfo;
  check(H5Oget_info2(object, &oinfo, H5O_INFO_NUM_ATTRS), "read attributes");
  std::vector<std::string> out;
  for (hsize_t i = 0; i < oinfo.num_attrs; ++i) {
    char name[256];
    const ssize_t len =
        H5Aget_name_by_idx(object, ".", H5_INDEX_NAME, H5_ITER_INC, i, name, sizeof name, H5P_DEFAULT);
    if (len < 0) throw CubeError("cannot read an attribute name");
    out.emplace_back(name);
  }
  return out;
}

bool known_dataset(const std::string& name) {
  static const std::set<std::string> known = [] {
    std::set<std::string> k;
    for (const char* group : {"/summary/", "/exact/", "/mc/"})
      for (const char* axis : {"model", "side", "level", "method", "n", "p"})
        k.insert(std::string(group) + axis);
    for (auto m : engine::metric_names) k.insert("/exact/" + std::string(m));
    for (auto m : engine::mc_metric_names) k.insert("/mc/" + std::string(m));
    k.insert("/mc/replicates");
    for (auto s : engine::stat_names) k.insert("/summary/" + std::string(s));
    for (std::size_t i = 0; i < engine::grid_stat_count; ++i)
      k.insert("/summary/mc_" + std::string(engine::stat_names[i]));
    k.insert("/progress/done");
    k.insert("/progress/shard_chunks");
    return k;
  }();
  return known.count(name) > 0;
}

/// A text attribute, or `fallback` when it is missing or cannot be read.
std::string text_attr_or(hid_t obj, const std::string& name, const std::string& fallback) {
  try {
    return has_attr(obj, name) ? get_attr_string(obj, name) : fallback;
  } catch (const CubeError&) {
    return fallback;
  }
}

/// The scenario checksum and completeness of an existing cube, or throws
/// InputError when it is not a readable covergrid cube.
struct Existing {
  std::string sha;
  bool complete;
  std::string shard;
};

Existing read_existing(const std::string& path) {
  try {
    File f = File::open(path, false);
    const hid_t root = f.id();
    if (!has_attr(root, "format") || get_attr_string(root, "format") != cube_format_name)
      throw InputError(path,
                       "exists and is not a covergrid cube; not touching it (use --overwrite to replace it)");
    return {get_attr_string(root, "scenario_sha256"), get_attr_int(root, "complete") != 0,
            has_attr(root, "shard") ? get_attr_string(root, "shard") : std::string("all")};
  } catch (const CubeError&) {
    throw InputError(
        path, "exists and is not a readable covergrid cube; not touching it (use --overwrite to replace it)");
  }
}

}  // namespace

// ---------------------------------------------------------------- journal

namespace {

constexpr char journal_magic[8] = {'C', 'G', 'J', 'O', 'U', 'R', 'N', '1'};
constexpr std::uint32_t record_magic = 0x31484B43;  // "CKH1"
constexpr std::size_t journal_header_size = 8 + 4 + 4 + 64 + 8 * 4;
constexpr std::size_t record_header_size = 4 + 4 + 8 + 8 + 8;

/// Journal format versions: 1 checksums each record's payload only and its
/// header not at all; 2 (written now) also covers a record's chunk id and
/// size and the header itself, so a flipped byte there is seen as damage
/// rather than read as another chunk or another scenario. Both are read.
constexpr std::uint32_t journal_version = 2;

/// Word-wise FNV-1a style checksum of a record's payload (catches torn and
/// stale records; not a cryptographic hash).
std::uint64_t checksum(const char* data, std::size_t size) {
  std::uint64_t h = 0xcbf29ce484222325ull;
  std::size_t i = 0;
  for (; i + 8 <= size; i += 8) {
    std::uint64_t w;
    std::memcpy(&w, data + i, 8);
    h = (h ^ w) * 0x100000001b3ull;
  }
  for (; i < size; ++i) h = (h ^ static_cast<unsigned char>(data[i])) * 0x100000001b3ull;
  return h;
}

/// A record's checksum: the payload's, and from version 2 on also its chunk
/// id and size.
std::uint64_t record_checksum(std::uint32_t version, std::uint64_t id, const char* data, std::size_t size) {
  std::uint64_t h = checksum(data, size);
  if (version >= 2) {
    h = (h ^ id) * 0x100000001b3ull;
    h = (h ^ static_cast<std::uint64_t>(size)) * 0x100000001b3ull;
  }
  return h;
}

template <class T>
void put(std::string& out, const T& v) {
  out.append(reinterpret_cast<const char*>(&v), sizeof v);
}
void put_vector(std::string& out, const std::vector<double>& v) {
  put(out, static_cast<std::uint64_t>(v.size()));
  out.append(reinterpret_cast<const char*>(v.data()), v.size() * sizeof(double));
}

class Reader {
 public:
  Reader(const char* data, std::size_t size) : p_(data), end_(data + size) {}
  template <class T>
  T get() {
    T v;
    need(sizeof v);
    std::memcpy(&v, p_, sizeof v);
    p_ += sizeof v;
    return v;
  }
  void get_vector(std::vector<double>& v) {
    const auto size = get<std::uint64_t>();
    // Compared as a count, never as size * 8, which wraps for a crafted size
    // (2^61 + 1 times 8 is 8) and would let resize() try 2^61 elements.
    if (size > static_cast<std::uint64_t>(end_ - p_) / sizeof(double))
      throw CubeError("journal record is shorter than its contents");
    v.resize(size);
    // An empty vector's data() may be null, and memcpy's arguments must
    // not be even for 0 bytes (found by scripts/fuzz under UBSan).
    if (size > 0) std::memcpy(v.data(), p_, size * sizeof(double));
    p_ += size * sizeof(double);
  }

 private:
  void need(std::size_t k) const {
    if (static_cast<std::size_t>(end_ - p_) < k)
      throw CubeError("journal record is shorter than its contents");
  }
  const char* p_;
  const char* end_;
};

}  // namespace

namespace {

/// The bytes encode_chunk writes for `r`.
std::size_t encoded_size(const engine::ChunkResult& r) {
  std::size_t bytes = 1;
  auto add = [&](const auto& vectors) {
    for (const auto& v : vectors) bytes += 8 + v.size() * sizeof(double);
  };
  if (r.has_exact) add(r.exact);
  if (r.has_row_stats) add(r.row_stats);
  if (r.has_grid_stats) add(r.grid_stats);
  if (r.has_mc) {
    add(r.mc);
    bytes += 8 + r.mc_replicates.size() * sizeof(double);
  }
  if (r.has_mc_grid_stats) add(r.mc_grid_stats);
  return bytes;
}

/// Appends the encoding of `r` to `out` (one reservation, no regrowth).
void encode_into(std::string& out, const engine::ChunkResult& r) {
  out.reserve(out.size() + encoded_size(r));
  const std::uint8_t flags = static_cast<std::uint8_t>((r.has_exact ? 1 : 0) | (r.has_row_stats ? 2 : 0) |
                                                       (r.has_grid_stats ? 4 : 0) | (r.has_mc ? 8 : 0) |
                                                       (r.has_mc_grid_stats ? 16 : 0));
  put(out, flags);
  if (r.has_exact)
    for (const auto& v : r.exact) put_vector(out, v);
  if (r.has_row_stats)
    for (const auto& v : r.row_stats) put_vector(out, v);
  if (r.has_grid_stats)
    for (const auto& v : r.grid_stats) put_vector(out, v);
  if (r.has_mc) {
    for (const auto& v : r.mc) put_vector(out, v);
    put_vector(out, r.mc_replicates);
  }
  if (r.has_mc_grid_stats)
    for (const auto& v : r.mc_grid_stats) put_vector(out, v);
}

}  // namespace

std::string encode_chunk(const engine::ChunkResult& r) {
  std::string out;
  encode_into(out, r);
  return out;
}

void decode_chunk(const char* data, std::size_t size, engine::ChunkResult& r) {
  Reader in(data, size);
  const auto flags = in.get<std::uint8_t>();
  r.has_exact = flags & 1;
  r.has_row_stats = flags & 2;
  r.has_grid_stats = flags & 4;
  r.has_mc = flags & 8;
  r.has_mc_grid_stats = flags & 16;
  if (r.has_exact)
    for (auto& v : r.exact) in.get_vector(v);
  if (r.has_row_stats)
    for (auto& v : r.row_stats) in.get_vector(v);
  if (r.has_grid_stats)
    for (auto& v : r.grid_stats) in.get_vector(v);
  if (r.has_mc) {
    for (auto& v : r.mc) in.get_vector(v);
    in.get_vector(r.mc_replicates);
  }
  if (r.has_mc_grid_stats)
    for (auto& v : r.mc_grid_stats) in.get_vector(v);
}

namespace {

/// Writes at an explicit offset (the end of the last valid record), so the
/// descriptor's own position never matters.
void write_all(int fd, const char* data, std::size_t size, std::uint64_t offset, const std::string& path) {
  while (size > 0) {
    const ssize_t k = ::pwrite(fd, data, size, static_cast<off_t>(offset));
    if (k < 0) {
      if (errno == EINTR) continue;
      if (out_of_space_errno(errno))
        throw OutOfSpace(fmt::format("cannot write {}: {}", path, out_of_space_text));
      throw CubeError(fmt::format("cannot write {}: {}", path, std::strerror(errno)));
    }
    data += k;
    size -= static_cast<std::size_t>(k);
    offset += static_cast<std::uint64_t>(k);
  }
}

bool read_at(int fd, char* data, std::size_t size, std::uint64_t offset) {
  while (size > 0) {
    const ssize_t k = ::pread(fd, data, size, static_cast<off_t>(offset));
    if (k < 0 && errno == EINTR) continue;
    if (k <= 0) return false;
    data += k;
    size -= static_cast<std::size_t>(k);
    offset += static_cast<std::uint64_t>(k);
  }
  return true;
}

struct JournalHeader {
  std::string sha;
  std::uint32_t version = 0;
  std::uint64_t n_block = 0, p_block = 0, chunks = 0, combos = 0;
  /// Why the header cannot be trusted ("" when it can): the file starts as a
  /// journal of ours but the rest of its header is damaged.
  std::string damage;
};

/// The header's own checksum (version 2), stored in its 32-bit field after
/// the version; computed with that field zero.
std::uint32_t header_checksum(std::string bytes) {
  std::memset(bytes.data() + 12, 0, 4);
  // Folded: the low half of a product depends only on the low halves of its
  // factors, so the low 32 bits alone would miss changes in a word's high half.
  const std::uint64_t h = checksum(bytes.data(), bytes.size());
  return static_cast<std::uint32_t>(h ^ (h >> 32));
}

std::string header_bytes(const engine::Scenario& s, const engine::Plan& plan) {
  std::string out(journal_magic, 8);
  put(out, journal_version);
  put(out, std::uint32_t{0});
  std::string sha = s.sha256;
  sha.resize(64, ' ');
  out += sha;
  put(out, static_cast<std::uint64_t>(plan.n_block));
  put(out, static_cast<std::uint64_t>(plan.p_block));
  put(out, static_cast<std::uint64_t>(plan.chunks.size()));
  put(out, static_cast<std::uint64_t>(engine::combo_count(s)));
  const std::uint32_t sum = header_checksum(out);
  std::memcpy(out.data() + 12, &sum, 4);
  return out;
}

/// Reads a journal's header; nullopt if the file is not a journal of ours
/// (it does not start with the journal mark). A header that starts as ours
/// but is short, of an unknown version, or fails its checksum comes back
/// with `damage` set.
std::optional<JournalHeader> read_journal_header(const std::string& path) {
  const int fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) return std::nullopt;
  char buf[journal_header_size];
  std::memset(buf, 0, sizeof buf);
  const ssize_t got = ::pread(fd, buf, sizeof buf, 0);
  ::close(fd);
  if (got < 8 || std::memcmp(buf, journal_magic, 8) != 0) return std::nullopt;
  JournalHeader h;
  if (static_cast<std::size_t>(got) < sizeof buf) {
    h.damage = fmt::format("its header is cut short ({} of {} bytes)", got, sizeof buf);
    return h;
  }
  Reader rest(buf + 8, sizeof buf - 8);
  h.version = rest.get<std::uint32_t>();
  const auto sum = rest.get<std::uint32_t>();
  h.sha.assign(buf + 16, 64);
  Reader blocks(buf + 80, sizeof buf - 80);
  h.n_block = blocks.get<std::uint64_t>();
  h.p_block = blocks.get<std::uint64_t>();
  h.chunks = blocks.get<std::uint64_t>();
  h.combos = blocks.get<std::uint64_t>();
  if (h.version != 1 && h.version != journal_version)
    h.damage = fmt::format("its header gives format version {} (this covergrid writes {})", h.version,
                           journal_version);
  else if (h.version >= 2 && header_checksum(std::string(buf, sizeof buf)) != sum)
    h.damage = "its header fails its checksum";
  else if (h.sha.find_first_not_of("0123456789abcdef") != std::string::npos)
    h.damage = "its header holds no valid scenario checksum";
  return h;
}

/// Whether `path` is a journal file cut off before its header was whole: no
/// longer than a header and, as far as it goes, the journal mark.
bool journal_is_stub(const std::string& path) {
  std::error_code ec;
  if (!fs::is_regular_file(path, ec)) return false;
  const auto size = fs::file_size(path, ec);
  if (ec || size >= journal_header_size) return false;
  char head[8] = {};
  const int fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) return false;
  const std::size_t want = std::min<std::size_t>(static_cast<std::size_t>(size), 8);
  const bool read_ok = want == 0 || read_at(fd, head, want, 0);
  ::close(fd);
  return read_ok && std::memcmp(head, journal_magic, want) == 0;
}

}  // namespace

std::string journal_path(const std::string& cube_path) { return cube_path + ".journal"; }

OutputState inspect_output(const engine::Scenario& scenario, bool overwrite, const std::string& shard) {
  const std::string& path = scenario.cube_path;
  const std::string journal = journal_path(path);
  // A journal shorter than its header holds no chunk: the run that created
  // it stopped before its header was written (a full disk). It is removed,
  // so that the same command starts the run again instead of refusing it.
  if (journal_is_stub(journal)) {
    std::error_code ignored;
    fs::remove(journal, ignored);
  }
  if (overwrite) {
    // --overwrite replaces only files covergrid wrote: a cube (an HDF5 file)
    // and a journal of ours, never a text file or someone else's data.
    if (const std::string problem = engine::replacement_problem(path, {}, engine::Replaces::cube);
        !problem.empty())
      throw InputError(path, problem);
    std::error_code ec;
    if (fs::is_regular_file(journal, ec) && fs::file_size(journal, ec) > 0 && !read_journal_header(journal))
      throw InputError(journal,
                       "exists and is not a covergrid journal; --overwrite replaces only files "
                       "covergrid wrote: remove it yourself");
    return OutputState::fresh;
  }
  if (fs::exists(path)) {
    const Existing e = read_existing(path);
    if (e.sha != scenario.sha256)
      throw InputError(
          path,
          "holds the results of a different scenario (checksum differs); use --overwrite to replace it");
    if (e.shard != shard)
      throw InputError(
          path, fmt::format("holds shard {} of this scenario, not {}; use --overwrite to replace it", e.shard,
                            shard == "all" ? "the whole cube" : "shard " + shard));
    if (e.complete && !fs::exists(journal)) return OutputState::up_to_date;
  }
  if (fs::exists(journal)) {
    const auto h = read_journal_header(journal);
    if (!h)
      throw InputError(journal, "exists and is not a covergrid journal; not touching it (use --overwrite)");
    if (!h->damage.empty())
      throw InputError(journal, "is a damaged journal: " + h->damage +
                                    "; its chunks cannot be trusted: use --overwrite to start the run again");
    if (h->sha != scenario.sha256)
      throw InputError(journal,
                       "is an unfinished run of a different scenario; use --overwrite to discard it");
    return OutputState::resumed;
  }
  return OutputState::fresh;
}

namespace {

/// Whether a decoded chunk holds what a run computes for its chunk (the parts
/// present and every vector's length; see compute_with_tables in
/// engine/src/run.cpp): a record that passes its checksum but does not fit
/// is damage, and would otherwise be read past its end by assemble_cube.
bool chunk_fits(const engine::ChunkResult& r, const engine::Scenario& s) {
  const engine::ChunkSpec& c = r.spec;
  const std::size_t combos = engine::combo_count(s), cells = c.n_count * c.p_count;
  const bool whole_rows = c.p_begin == 0 && c.p_count == s.p.size();
  const bool mc = s.replicates > 0;
  if (r.has_exact != s.exact || r.has_mc != mc || r.has_row_stats != (s.exact && c.p_begin == 0) ||
      r.has_grid_stats != (s.exact && whole_rows) || r.has_mc_grid_stats != (mc && whole_rows))
    return false;
  auto all = [](const auto& vectors, std::size_t size) {
    return std::all_of(vectors.begin(), vectors.end(), [&](const auto& v) { return v.size() == size; });
  };
  return (!r.has_exact || all(r.exact, combos * cells)) &&
         (!r.has_row_stats || all(r.row_stats, combos * c.n_count)) &&
         (!r.has_grid_stats || all(r.grid_stats, combos * c.n_count)) &&
         (!r.has_mc || (all(r.mc, combos * cells) && r.mc_replicates.size() == cells)) &&
         (!r.has_mc_grid_stats || all(r.mc_grid_stats, combos * c.n_count));
}

}  // namespace

CubeWriter::CubeWriter(const engine::Scenario& scenario, const engine::Plan& plan, bool resume,
                       const engine::ShardSelection* shard)
    : scenario_(scenario),
      plan_(plan),
      shard_(shard),
      final_path_(scenario.cube_path),
      journal_path_(journal_path(scenario.cube_path)),
      temp_path_(partial_path(scenario.cube_path)),
      offsets_(plan.chunks.size(), -1) {
  if (const std::string problem = engine::output_location_problem(final_path_); !problem.empty())
    throw InputError(final_path_, problem);
  const std::string header = header_bytes(scenario, plan);
  if (resume) {
    const auto h = read_journal_header(journal_path_);
    if (!h || h->sha != scenario.sha256) throw CubeError(journal_path_ + ": not a journal of this scenario");
    if (h->n_block != plan.n_block || h->p_block != plan.p_block || h->chunks != plan.chunks.size() ||
        h->combos != engine::combo_count(scenario))
      throw InputError(journal_path_,
                       "was written with a different chunk layout; use --overwrite to start over");
    version_ = h->version;
    fd_ = ::open(journal_path_.c_str(), O_RDWR | O_CLOEXEC);
    if (fd_ < 0) throw CubeError(fmt::format("cannot open {}: {}", journal_path_, std::strerror(errno)));
    struct stat st {};
    if (::fstat(fd_, &st) != 0)
      throw CubeError(fmt::format("cannot read the size of {}: {}", journal_path_, std::strerror(errno)));
    const std::uint64_t file_end = static_cast<std::uint64_t>(st.st_size);
    // Walk the records. One that is cut short, unknown, larger than what is
    // left of the file, fails its checksum or does not fit its chunk is
    // damage (a run killed mid-write leaves such a torn last record; a
    // changed byte, one anywhere): the walk skips to the next valid record,
    // so that nothing after the damage is lost, and says what it dropped.
    std::vector<char> buf;
    // "" when a valid record starts at `at` (its id and size set), else why not.
    auto check_record = [&](std::uint64_t at, std::uint64_t& id, std::uint64_t& size) -> std::string {
      if (file_end - at < record_header_size) return "an incomplete record header";
      char head[record_header_size];
      if (!read_at(fd_, head, sizeof head, at)) return "an unreadable record header";
      Reader in(head, sizeof head);
      const auto magic = in.get<std::uint32_t>();
      in.get<std::uint32_t>();
      id = in.get<std::uint64_t>();
      size = in.get<std::uint64_t>();
      const auto sum = in.get<std::uint64_t>();
      if (magic != record_magic) return "a damaged record header (no record mark)";
      const std::uint64_t left = file_end - at - record_header_size;
      if (size > left)
        return fmt::format("a record of {} bytes with only {} left in the file (torn)", size, left);
      if (id >= plan.chunks.size())
        return fmt::format("a record of chunk {}, which this scenario's {} chunks do not have", id,
                           plan.chunks.size());
      buf.resize(size);
      if (!read_at(fd_, buf.data(), size, at + record_header_size)) return "an unreadable record";
      if (record_checksum(version_, id, buf.data(), size) != sum)
        return fmt::format("a record of chunk {} that fails its checksum", id);
      engine::ChunkResult r;
      r.spec = plan.chunks[id];
      r.combos = engine::combo_count(scenario);
      try {
        decode_chunk(buf.data(), size, r);
      } catch (const CubeError&) {
        return fmt::format("a record of chunk {} whose contents are cut short", id);
      }
      if (!chunk_fits(r, scenario))
        return fmt::format("a record of chunk {} that does not fit that chunk", id);
      return "";
    };
    std::uint64_t at = journal_header_size;
    std::size_t dropped = 0, regions = 0, not_records = 0;
    std::string first_reason;
    std::uint64_t first_at = 0;
    while (at < file_end) {
      std::uint64_t id = 0, size = 0;
      std::string reason = check_record(at, id, size);
      if (reason.empty()) {
        offsets_[id] = static_cast<std::int64_t>(at);
        at += record_header_size + size;
        continue;
      }
      // Damage at `at`: look for the next valid record after it, counting
      // the record marks passed on the way (each the start of a lost record).
      if (regions++ == 0) {
        first_reason = reason;
        first_at = at;
      }
      ++dropped;
      // A place that starts with a record mark, or lies between records, was
      // a record (its chunk is lost); bytes after the last record that do not
      // start with a mark (garbage appended to the file) held no chunk.
      std::uint32_t mark_at = 0;
      char mark_bytes[4];
      if (read_at(fd_, mark_bytes, 4, at)) std::memcpy(&mark_at, mark_bytes, 4);
      const bool starts_as_record = mark_at == record_magic;
      std::uint64_t next = file_end;
      for (std::uint64_t q = at + 1; q + record_header_size <= file_end;) {
        const std::size_t window = static_cast<std::size_t>(std::min<std::uint64_t>(1 << 20, file_end - q));
        std::vector<char> scan(window);
        if (!read_at(fd_, scan.data(), window, q)) break;
        bool found = false;
        for (std::size_t k = 0; k + 4 <= window; ++k) {
          std::uint32_t m;
          std::memcpy(&m, scan.data() + k, 4);
          if (m != record_magic) continue;
          std::uint64_t id2 = 0, size2 = 0;
          if (check_record(q + k, id2, size2).empty()) {
            next = q + k;
            found = true;
            break;
          }
          ++dropped;
        }
        if (found || window < 4) break;
        q += window - 3;  // a mark may straddle two windows
      }
      if (!starts_as_record && next == file_end) ++not_records;
      at = next;
      if (next == file_end) break;
    }
    std::uint64_t valid_end = journal_header_size;
    for (const auto o : offsets_)
      if (o >= 0) {
        char head[record_header_size];
        if (read_at(fd_, head, sizeof head, static_cast<std::uint64_t>(o))) {
          std::uint64_t size;
          std::memcpy(&size, head + 16, 8);
          valid_end = std::max(valid_end, static_cast<std::uint64_t>(o) + record_header_size + size);
        }
      }
    end_ = valid_end;
    if (dropped > 0) {
      std::size_t kept = 0;
      for (const auto o : offsets_) kept += o >= 0 ? 1 : 0;
      resume_note_ = fmt::format(
          "{}: dropped {} damaged record{} ({} chunk{} to compute again): at byte {}, {}{}; {} chunk{} "
          "kept",
          journal_path_, dropped, dropped == 1 ? "" : "s", dropped - not_records,
          dropped - not_records == 1 ? "" : "s", first_at, first_reason,
          regions > 1 ? fmt::format(", and {} more damaged places", regions - 1) : "", kept,
          kept == 1 ? "" : "s");
    }
    if (::ftruncate(fd_, static_cast<off_t>(end_)) != 0)
      throw CubeError(fmt::format("cannot trim {}: {}", journal_path_, std::strerror(errno)));
  } else {
    std::error_code ec;
    fs::remove(temp_path_, ec);
    fd_ = ::open(journal_path_.c_str(), O_RDWR | O_CREAT | O_TRUNC | O_CLOEXEC, 0644);
    if (fd_ < 0) throw CubeError(fmt::format("cannot create {}: {}", journal_path_, std::strerror(errno)));
    try {
      write_all(fd_, header.data(), header.size(), 0, journal_path_);
    } catch (const OutOfSpace&) {
      refuse_out_of_space(journal_path_, "");
    }
    end_ = header.size();
    created_ = true;
  }
}

CubeWriter::~CubeWriter() {
  drop_assembly();
  if (fd_ >= 0) ::close(fd_);
}

void CubeWriter::open_assembly() {
  if (!assembly_) assembly_ = std::make_unique<CubeAssembly>(temp_path_, scenario_, plan_, shard_);
}

void CubeWriter::drop_assembly() {
  if (!assembly_) return;
  assembly_.reset();
  std::error_code ec;
  fs::remove(temp_path_, ec);
}

bool CubeWriter::discard_if_empty() {
  if (!created_ || written_ > 0 || fd_ < 0) return false;
  drop_assembly();
  ::close(fd_);
  fd_ = -1;
  std::error_code ec;
  fs::remove(journal_path_, ec);
  return !ec;
}

std::vector<char> CubeWriter::completed() {
  std::vector<char> out(offsets_.size());
  for (std::size_t i = 0; i < offsets_.size(); ++i) out[i] = offsets_[i] >= 0 ? 1 : 0;
  return out;
}

void CubeWriter::write_chunk(const engine::ChunkResult& r) {
  record_.assign(record_header_size, '\0');
  encode_into(record_, r);
  append_record(r.spec.id);
  // Into the cube as well, now that the journal holds it: the assembly then
  // overlaps the computation instead of following it. The journal stays the
  // record of the run: if the cube cannot be written now (a full disk), it
  // is dropped and the run goes on; finish() then assembles it from the
  // journal, and a failure there is reported as it always was.
  if (progressive_failed_) return;
  try {
    quiet_hdf5_errors();  // per thread: the chunks come from any of the run's threads
    open_assembly();
    assembly_->add(r);
  } catch (const CubeError&) {
    drop_assembly();
    progressive_failed_ = true;
  }
}

void CubeWriter::write_encoded(std::size_t chunk, const std::string& payload) {
  record_.assign(record_header_size, '\0');
  record_ += payload;
  append_record(chunk);
}

void CubeWriter::append_record(std::size_t chunk) {
  if (chunk >= offsets_.size()) throw CubeError("internal: chunk id out of range");
  const char* payload = record_.data() + record_header_size;
  const std::size_t size = record_.size() - record_header_size;
  std::string head;
  head.reserve(record_header_size);
  put(head, record_magic);
  put(head, std::uint32_t{0});
  put(head, static_cast<std::uint64_t>(chunk));
  put(head, static_cast<std::uint64_t>(size));
  put(head, record_checksum(version_, chunk, payload, size));
  record_.replace(0, record_header_size, head);
  try {
    write_all(fd_, record_.data(), record_.size(), end_, journal_path_);
  } catch (const OutOfSpace&) {
    // What was written of this record is a torn tail, which a resume drops.
    refuse_out_of_space(journal_path_, "");
  }
  offsets_[chunk] = static_cast<std::int64_t>(end_);
  ++written_;
  end_ += record_.size();
}

void CubeWriter::checkpoint() {
  // Each record is handed to the kernel by write() as it is made, so a killed
  // process loses nothing written. fdatasync makes it survive a crash of the
  // machine too; it is done at most every sync_interval: syncing after every
  // few chunks wrote the whole journal to the disk even when the run ended
  // (and deleted it) seconds later (`scripts/bench whole`).
  if (std::chrono::steady_clock::now() - last_sync_ >= sync_interval) sync();
}

void CubeWriter::sync() {
  last_sync_ = std::chrono::steady_clock::now();
  if (fd_ < 0) return;
  if (::fdatasync(fd_) != 0 && errno != EINVAL) {
    if (out_of_space_errno(errno)) refuse_out_of_space(journal_path_, "");
    throw CubeError(fmt::format("cannot sync {}: {}", journal_path_, std::strerror(errno)));
  }
}

void CubeWriter::read_record(std::size_t chunk, engine::ChunkResult& r) const {
  if (offsets_[chunk] < 0)
    throw CubeError("internal: chunk " + std::to_string(chunk) + " is not in the journal");
  const std::uint64_t at = static_cast<std::uint64_t>(offsets_[chunk]);
  char head[record_header_size];
  if (!read_at(fd_, head, sizeof head, at)) throw CubeError(journal_path_ + ": cannot read a record");
  Reader in(head, sizeof head);
  in.get<std::uint32_t>();
  in.get<std::uint32_t>();
  in.get<std::uint64_t>();
  const auto size = in.get<std::uint64_t>();
  read_buffer_.resize(size);
  if (!read_at(fd_, read_buffer_.data(), size, at + record_header_size))
    throw CubeError(journal_path_ + ": cannot read a record");
  r.spec = plan_.chunks[chunk];
  r.combos = engine::combo_count(scenario_);
  decode_chunk(read_buffer_.data(), size, r);
}

void CubeWriter::read_rows(engine::Source source, std::size_t metric, std::size_t model, std::size_t n_begin,
                           std::size_t n_count, std::size_t p_begin, std::size_t p_count,
                           std::vector<double>& out) {
  const std::size_t n_blocks = (scenario_.n.size() + plan_.n_block - 1) / plan_.n_block;
  const std::size_t p_blocks = (scenario_.p.size() + plan_.p_block - 1) / plan_.p_block;
  const std::size_t id = (model * n_blocks + n_begin / plan_.n_block) * p_blocks + p_begin / plan_.p_block;
  const auto& spec = plan_.chunks.at(id);
  if (spec.n_begin != n_begin || spec.n_count != n_count || spec.p_begin != p_begin ||
      spec.p_count != p_count)
    throw CubeError("internal: read_rows asked for a block that is not one chunk");
  engine::ChunkResult r;
  read_record(id, r);
  out = source == engine::Source::exact ? std::move(r.exact.at(metric)) : std::move(r.mc.at(metric));
}

void CubeWriter::write_grid_stats(engine::Source source, std::size_t model, std::size_t n_begin,
                                  std::size_t n_count, const std::vector<double>& stats) {
  split_stats_[{source == engine::Source::exact ? 0 : 1, model * scenario_.n.size() + n_begin}] = stats;
  (void)n_count;
}

[[noreturn]] void CubeWriter::refuse_out_of_space(const std::string& path, const std::string& doing) const {
  std::size_t saved = 0;
  for (const auto o : offsets_) saved += o >= 0 ? 1 : 0;
  const std::size_t total = shard_ ? shard_->chunks.size() : offsets_.size();
  throw InputError(path,
                   fmt::format("cannot write{}: {}; {} of {} chunks are saved in {}: free space and run "
                               "the same command to resume",
                               doing, out_of_space_text, saved, total, journal_path_));
}

void CubeWriter::finish() {
  // A failed assembly leaves no .partial behind; the journal stays, so that
  // the same command assembles the cube again once the cause is gone.
  try {
    quiet_hdf5_errors();
    open_assembly();
    assembly_->add_missing([this](std::size_t id, engine::ChunkResult& into) {
      if (stop_ && stop_->load()) throw Interrupted("stopped while the cube was being assembled");
      read_record(id, into);
    });
    assembly_->finish(split_stats_);
    assembly_.reset();
    if (stop_ && stop_->load()) throw Interrupted("stopped while the cube was being assembled");
  } catch (const OutOfSpace&) {
    drop_assembly();
    std::error_code ec;
    fs::remove(temp_path_, ec);
    refuse_out_of_space(temp_path_, " the cube");
  } catch (...) {
    drop_assembly();
    std::error_code ec;
    fs::remove(temp_path_, ec);
    throw;
  }
  ::close(fd_);
  fd_ = -1;
  std::error_code ec;
  fs::rename(temp_path_, final_path_, ec);
  if (ec) throw CubeError(fmt::format("cannot rename {} to {}: {}", temp_path_, final_path_, ec.message()));
  fs::remove(journal_path_, ec);
}

namespace {

/// CF-style `long_name` and `units` of the cube's datasets: probabilities,
/// shares, widths and p-locations are dimensionless ("1"), counts "count".
/// The label axes (model, side, method) are strings and carry no units.
struct Description {
  std::string_view name, long_name, units;
};
constexpr Description descriptions[] = {
    {"model", "sampling model", ""},
    {"side", "interval side", ""},
    {"method", "interval method (label)", ""},
    {"level", "nominal confidence level", "1"},
    {"n", "sample size (number of trials)", "count"},
    {"p", "true proportion", "1"},
    {"coverage", "coverage probability P(L <= p <= U)", "1"},
    {"miss_low", "probability that the interval lies below p, P(U < p)", "1"},
    {"miss_high", "probability that the interval lies above p, P(L > p)", "1"},
    {"width", "expected interval width E[U - L]", "1"},
    {"width_sd", "standard deviation of the interval width", "1"},
    {"degenerate", "probability of a degenerate interval, P(U = L)", "1"},
    {"overshoot", "probability that a raw limit falls outside [0, 1]", "1"},
    {"coverage_se", "standard error of the simulated coverage", "1"},
    {"replicates", "Monte Carlo replicates of the cell", "count"},
    {"mean_coverage", "mean coverage over the grid p", "1"},
    {"min_coverage", "smallest coverage over the grid p", "1"},
    {"min_coverage_p", "grid p of the smallest coverage", "1"},
    {"rms_deviation", "root-mean-square deviation of coverage from nominal over the grid p", "1"},
    {"share_below", "share of the grid p with coverage below nominal", "1"},
    {"mean_width", "mean expected width over the grid p", "1"},
    {"mean_miss_low", "mean P(U < p) over the grid p", "1"},
    {"mean_miss_high", "mean P(L > p) over the grid p", "1"},
    {"inf_coverage", "infimum of coverage over the continuous p-range", "1"},
    {"inf_coverage_p", "p where the coverage infimum is attained or approached", "1"},
    {"inf_coverage_from", "how the infimum is reached: -1 from below p, +1 from above, 0 attained", "1"},
    {"inf_refined", "1 where a non-contiguous covered set forced a dense search", "1"},
    {"mean_coverage_continuous", "mean coverage under p uniform on the continuous p-range", "1"},
};

/// Sets long_name (with `prefix`, e.g. "exact ") and units of a dataset.
void describe(hid_t dataset, std::string_view name, const std::string& prefix = "") {
  for (const auto& d : descriptions)
    if (d.name == name) {
      set_attr(dataset, "long_name", prefix + std::string(d.long_name));
      if (!d.units.empty()) set_attr(dataset, "units", std::string(d.units));
      return;
    }
  throw CubeError("internal: no description of dataset " + std::string(name));
}

/// A chunk's replicate counts as the integers they are (the engine carries
/// them as doubles, exact below 2^53).
std::vector<std::int64_t> replicate_counts(const std::vector<double>& v) {
  std::vector<std::int64_t> out(v.size());
  for (std::size_t i = 0; i < v.size(); ++i) {
    if (!(v[i] >= 0 && v[i] <= 9007199254740992.0 && v[i] == std::floor(v[i])))
      throw CubeError(fmt::format("internal: replicate count {} is not a whole number", v[i]));
    out[i] = static_cast<std::int64_t>(v[i]);
  }
  return out;
}

}  // namespace

CubeAssembly::CubeAssembly(const std::string& path, const engine::Scenario& scenario,
                           const engine::Plan& plan, const engine::ShardSelection* shard)
    : s_(scenario), plan_(plan), shard_(shard), file_(File::create(path)) {
  const engine::Scenario& s = s_;
  const hid_t root = file_.id();
  set_attr(root, "format", std::string(cube_format_name));
  set_attr(root, "format_version", std::int64_t{cube_format_version});
  set_attr(root, "tool_version", std::string(tool_version));
  set_attr(root, "title", s.title);
  set_attr(root, "scenario", s.source_text);
  set_attr(root, "scenario_sha256", s.sha256);
  set_attr(root, "seed", static_cast<std::int64_t>(s.seed));
  set_attr(root, "created_utc", utc_now());
  set_attr(root, "shard", shard ? shard->spec.label() : std::string("all"));
  set_attr(root, "complete", std::int64_t{0});

  std::vector<std::string> models, sides, labels;
  for (const auto& m : s.models) models.push_back(m.label);
  for (auto side : s.sides) sides.emplace_back(methods::side_name(side));
  for (const auto& m : s.methods) labels.push_back(m.label);
  const std::vector<std::int64_t> ns(s.n.begin(), s.n.end());
  // Every metric group holds its own copy of the six axes as dimension
  // scales: netCDF-4 readers (xarray) take a group's coordinates from the
  // group itself, so a group is a self-contained labelled dataset.
  auto write_axes = [&](hid_t group) {
    std::vector<Handle> scales;
    scales.push_back(write_vector(group, "model", models));
    scales.push_back(write_vector(group, "side", sides));
    scales.push_back(write_vector(group, "level", s.levels));
    scales.push_back(write_vector(group, "method", labels));
    scales.push_back(write_vector(group, "n", ns));
    scales.push_back(write_vector(group, "p", s.p));
    for (std::size_t i = 0; i < scales.size(); ++i) {
      make_scale(scales[i].get(), axis_names[i]);
      describe(scales[i].get(), axis_names[i]);
    }
    return scales;
  };

  Handle mg = create_group(root, "methods");
  for (const auto& m : s.methods) {
    Handle g = create_group(mg.get(), m.label);
    set_attr(g.get(), "id", m.entry->info.id);
    set_attr(g.get(), "name", m.entry->info.name);
    set_attr(g.get(), "family", std::string(methods::family_name(m.entry->info.family)));
    set_attr(g.get(), "reference", m.entry->info.reference);
    set_attr(g.get(), "definition", m.entry->info.definition);
    for (const auto& [k, v] : m.params) set_attr(g.get(), "param." + k, methods::param_text(v));
  }

  // One group per sampling model, in axis order: its kind, description and
  // parameters, and for a model that snaps p (a finite population's K/N) the
  // grid's p as the model attains them.
  Handle models_group = create_group(root, "models");
  for (std::size_t i = 0; i < s.models.size(); ++i) {
    const engine::ModelSpec& m = s.models[i];
    Handle g = create_group(models_group.get(), m.label);
    set_attr(g.get(), "index", static_cast<std::int64_t>(i));
    set_attr(g.get(), "kind", std::string(m.model->kind()));
    if (const auto* entry = engine::find_model(m.model->kind()))
      set_attr(g.get(), "description", entry->description);
    for (const auto& [k, v] : m.params) set_attr(g.get(), "param." + k, methods::param_text(v));
    if (m.model->lattice() > 0) {
      std::vector<double> attained;
      for (double p : s.p) attained.push_back(m.model->attainable(p));
      Handle d = write_vector(g.get(), "p_attained", attained);
      set_attr(
          d.get(), "long_name",
          std::string(
              "the true proportion each grid p is evaluated at (snapped to the model's attainable values)"));
      set_attr(d.get(), "units", std::string("1"));
    }
  }

  const std::size_t S = s.sides.size(), L = s.levels.size(), M = s.methods.size();
  S_ = S;
  L_ = L;
  M_ = M;
  const std::vector<hsize_t> dims = {s.models.size(), S, L, M, s.n.size(), s.p.size()};
  // A storage chunk holds a plan chunk's cells for several methods (up to
  // 128 KiB): HDF5's cost per chunk written (index update, filter pipeline,
  // a write call) was most of the assembly with one method per chunk
  // (`scripts/bench whole`). Every chunk is still written whole, once: the
  // run writes all methods of a plan chunk at a time.
  const hsize_t methods_per_chunk =
      std::min<hsize_t>(M, std::max<hsize_t>(1, 16384 / (plan_.n_block * plan_.p_block)));
  chunk_ = {1, 1, 1, methods_per_chunk, plan_.n_block, plan_.p_block};
  const std::vector<hsize_t>& chunk = chunk_;
  const std::vector<std::string> axis_list(axis_names.begin(), axis_names.end());
  // The metrics are stored uncompressed, checksummed (Fletcher-32). On the
  // prototype grid (`scripts/bench whole`) shuffle and deflate gained about
  // 1.3x on the continuous metrics (full mantissas) at most of the assembly
  // time, and on degenerate and overshoot (mostly exact zeros: 4 to 9x) they
  // cost 0.14 s of a 0.85 s run for 25 of 110 MB. `h5repack` makes an
  // archival copy smaller (for other HDF5 readers; the cube reader refuses
  // its link storage).
  auto make_metric = [&](hid_t group, const std::vector<Handle>& scales, const std::string& name,
                         const std::string& prefix) {
    Handle d = create_double_dataset(group, name, dims, chunk, ChunkedStorage{false, 0});
    set_attr(d.get(), "axes", axis_list);
    describe(d.get(), name, prefix);
    for (unsigned i = 0; i < 6; ++i) attach_scale(d.get(), scales[i].get(), i, axis_names[i]);
    return d;
  };
  std::vector<Handle>&exact = exact_, &mc = mc_;
  std::vector<Handle> exact_scales, mc_scales;
  Handle& mc_reps = mc_reps_;
  if (s.exact) {
    Handle eg = create_group(root, "exact");
    set_attr(eg.get(), "pmf_tail_bound", 5e-16);
    set_attr(eg.get(), "interval", std::string("closed [L, U]; limits clipped to [0, 1]"));
    exact_scales = write_axes(eg.get());
    for (auto name : engine::metric_names)
      exact.push_back(make_metric(eg.get(), exact_scales, std::string(name), "exact "));
  }
  if (s.replicates > 0) {
    Handle g = create_group(root, "mc");
    mc_scales = write_axes(g.get());
    set_attr(g.get(), "generator",
             std::string("Random123 Philox4x32-10; key = seed; counter = (replicate/2, 0, "
                         "p index, model << 24 | n)"));
    set_attr(g.get(), "sampler", std::string("inversion of the pmf-window CDF with a guide table"));
    set_attr(g.get(), "replicates", static_cast<std::int64_t>(s.replicates));
    set_attr(g.get(), "target_se", s.target_se);
    set_attr(g.get(), "max_replicates", static_cast<std::int64_t>(s.max_replicates));
    for (auto name : engine::mc_metric_names)
      mc.push_back(make_metric(g.get(), mc_scales, std::string(name), "simulated "));
    const std::vector<hsize_t> rdims = {s.models.size(), s.n.size(), s.p.size()};
    const std::vector<hsize_t> rchunk = {1, plan_.n_block, plan_.p_block};
    mc_reps = create_int64_dataset(g.get(), "replicates", rdims, rchunk);
    set_attr(mc_reps.get(), "axes", std::vector<std::string>{"model", "n", "p"});
    describe(mc_reps.get(), "replicates");
    attach_scale(mc_reps.get(), mc_scales[0].get(), 0, "model");
    attach_scale(mc_reps.get(), mc_scales[4].get(), 1, "n");
    attach_scale(mc_reps.get(), mc_scales[5].get(), 2, "p");
  }
  Handle sg = create_group(root, "summary");
  const std::vector<Handle> summary_scales = write_axes(sg.get());
  set_attr(sg.get(), "p_range",
           std::vector<std::string>{fmt::format("{}", s.p.front()), fmt::format("{}", s.p.back())});
  const std::vector<hsize_t> sdims(dims.begin(), dims.end() - 1);
  // Summary chunks hold every (side, level, method) of a run of n, about
  // 8192 values (64 KiB), whole blocks of the plan's rows: the chunks write
  // them a block of rows at a time, so each dataset keeps its open storage
  // chunk in a cache of that size and filters it once, when it is full.
  const hsize_t row_values = S * L * M;
  hsize_t n_chunk =
      std::max<hsize_t>(1, 8192 / std::max<hsize_t>(row_values, 1) / plan_.n_block) * plan_.n_block;
  n_chunk = std::min<hsize_t>(n_chunk, s.n.size());
  const std::vector<hsize_t> schunk = {1, S, L, M, n_chunk};
  const ChunkedStorage summary_storage{true, static_cast<std::size_t>(row_values * n_chunk * sizeof(double))};
  const std::vector<std::string> saxes(axis_list.begin(), axis_list.end() - 1);
  auto make_stat = [&](const std::string& name, const std::string& stat, const std::string& prefix) {
    Handle d = create_double_dataset(sg.get(), name, sdims, schunk, summary_storage);
    set_attr(d.get(), "axes", saxes);
    describe(d.get(), stat, prefix);
    for (unsigned i = 0; i < 5; ++i) attach_scale(d.get(), summary_scales[i].get(), i, axis_names[i]);
    return d;
  };
  std::vector<Handle>&stats = stats_, &mc_stats = mc_stats_;
  if (s.exact)
    for (auto name : engine::stat_names) stats.push_back(make_stat(std::string(name), std::string(name), ""));
  if (s.replicates > 0)
    for (std::size_t k = 0; k < engine::grid_stat_count; ++k) {
      const std::string stat(engine::stat_names[k]);
      mc_stats.push_back(make_stat("mc_" + stat, stat, "simulated "));
    }
  // The metrics share one storage layout: asked of one, it holds for all.
  if (!exact_.empty())
    direct_ = takes_whole_chunks(exact_.front().get());
  else if (!mc_.empty())
    direct_ = takes_whole_chunks(mc_.front().get());
  // The chunks this cube holds (a shard's only), as /progress/done records them.
  done_.assign(plan_.chunks.size(), shard ? 0 : 1);
  if (shard)
    for (std::size_t id : shard->chunks) done_.at(id) = 1;
  added_.assign(plan_.chunks.size(), 0);
}

void CubeAssembly::add(const engine::ChunkResult& r) {
  const engine::ChunkSpec& c = r.spec;
  if (c.id >= added_.size() || !done_[c.id])
    throw std::logic_error("internal: chunk " + std::to_string(c.id) + " does not belong in this cube");
  if (added_[c.id]) throw std::logic_error("internal: chunk " + std::to_string(c.id) + " added twice");
  const std::size_t S = S_, L = L_, M = M_;
  const std::vector<hsize_t>& chunk = chunk_;
  const std::vector<Handle>&exact = exact_, &mc = mc_, &stats = stats_, &mc_stats = mc_stats_;
  const Handle& mc_reps = mc_reps_;
  const std::vector<hsize_t> start = {c.model, 0, 0, 0, c.n_begin, c.p_begin};
  const std::vector<hsize_t> count = {1, S, L, M, c.n_count, c.p_count};
  const std::vector<hsize_t> sstart = {c.model, 0, 0, 0, c.n_begin};
  const std::vector<hsize_t> scount = {1, S, L, M, c.n_count};
  if (r.has_exact)
    for (std::size_t k = 0; k < engine::metric_count; ++k)
      write_whole_chunks(exact[k].get(), chunk, start, count, r.exact[k].data(), direct_);
  if (r.has_row_stats)
    for (std::size_t k = 0; k < r.row_stats.size(); ++k)
      write_block(stats[engine::grid_stat_count + k].get(), sstart, scount, r.row_stats[k].data());
  if (r.has_grid_stats)
    for (std::size_t k = 0; k < engine::grid_stat_count; ++k)
      write_block(stats[k].get(), sstart, scount, r.grid_stats[k].data());
  if (r.has_mc) {
    for (std::size_t k = 0; k < engine::mc_metric_count; ++k)
      write_whole_chunks(mc[k].get(), chunk, start, count, r.mc[k].data(), direct_);
    write_block_i64(mc_reps.get(), {c.model, c.n_begin, c.p_begin}, {1, c.n_count, c.p_count},
                    replicate_counts(r.mc_replicates).data());
  }
  if (r.has_mc_grid_stats)
    for (std::size_t k = 0; k < engine::grid_stat_count; ++k)
      write_block(mc_stats[k].get(), sstart, scount, r.mc_grid_stats[k].data());
  added_[c.id] = 1;
}

void CubeAssembly::add_missing(const std::function<void(std::size_t, engine::ChunkResult&)>& load) {
  engine::ChunkResult r;  // reused: its vectors keep their memory from chunk to chunk
  for (const auto& c : plan_.chunks) {
    if (!done_[c.id] || added_[c.id]) continue;
    load(c.id, r);
    add(r);
  }
}

void CubeAssembly::finish(const SplitStats& split_stats) {
  const engine::Scenario& s = s_;
  for (std::size_t id = 0; id < done_.size(); ++id)
    if (done_[id] && !added_[id])
      throw std::logic_error("internal: the cube is finished without chunk " + std::to_string(id));
  const std::size_t S = S_, L = L_, M = M_;
  const hid_t root = file_.id();
  // Grid statistics of rows split over chunks.
  const std::size_t combos = engine::combo_count(s);
  for (const auto& [key, values] : split_stats) {
    const std::size_t model = key.second / s.n.size(), n_begin = key.second % s.n.size();
    const std::size_t count = values.size() / (engine::grid_stat_count * combos);
    auto& target = key.first == 0 ? stats_ : mc_stats_;
    for (std::size_t k = 0; k < engine::grid_stat_count; ++k)
      write_block(target[k].get(), {model, 0, 0, 0, n_begin}, {1, S, L, M, count},
                  values.data() + k * combos * count);
  }
  Handle pg = create_group(root, "progress");
  set_attr(pg.get(), "n_block", static_cast<std::int64_t>(plan_.n_block));
  set_attr(pg.get(), "p_block", static_cast<std::int64_t>(plan_.p_block));
  write_vector(pg.get(), "done", done_);
  if (shard_)
    write_vector(pg.get(), "shard_chunks",
                 std::vector<std::int64_t>(shard_->chunks.begin(), shard_->chunks.end()));
  set_attr(root, "complete", std::int64_t{1});
  file_.flush();
  exact_.clear();
  mc_.clear();
  stats_.clear();
  mc_stats_.clear();
  mc_reps_.reset();
  file_.close();
}

void assemble_cube(const std::string& path, const CubeContents& in) {
  CubeAssembly cube(path, in.scenario, in.plan, in.shard);
  cube.add_missing(in.load);
  cube.finish(in.split_stats);
}

// ---------------------------------------------------------------- reading

namespace {

/// Rounding slack of the value-range checks: sums of pmf terms may land a
/// few units in the last place beyond [0, 1]; anything further is damage.
constexpr double range_slack = 1e-9;

/// The values a cube's number may take: [lo, hi] (within range_slack), or
/// NaN (a method that lacks a side; a cell a shard does not hold), and
/// whole numbers only when `integral`.
struct ValueRange {
  double lo, hi;
  bool integral;
};
constexpr ValueRange probability{0, 1, false};

/// Every /exact and /mc metric is a probability, a width of an interval in
/// [0, 1] or its standard deviation, or a coverage standard error: [0, 1].
/// The summaries too, but for the two coded ones.
ValueRange stat_range(std::string_view stat) {
  if (stat == "inf_coverage_from") return {-1, 1, true};
  if (stat == "inf_refined") return {0, 1, true};
  return probability;
}

bool in_range(double v, const ValueRange& r) {
  if (std::isnan(v)) return true;
  if (!(v >= r.lo - range_slack && v <= r.hi + range_slack)) return false;
  return !r.integral || v == std::floor(v);
}

std::string range_text(const ValueRange& r) {
  return r.integral ? fmt::format("the whole numbers {:g}..{:g} (or NaN)", r.lo, r.hi)
                    : fmt::format("[{:g}, {:g}] (or NaN)", r.lo, r.hi);
}

enum class Kind { f64, i64, u8, text };

const char* kind_name(Kind k) {
  switch (k) {
    case Kind::f64:
      return "float64";
    case Kind::i64:
      return "int64";
    case Kind::u8:
      return "uint8";
    case Kind::text:
      return "strings";
  }
  return "?";
}

bool has_kind(hid_t type, Kind k) {
  const H5T_class_t c = H5Tget_class(type);
  const std::size_t size = H5Tget_size(type);
  switch (k) {
    case Kind::f64:
      return c == H5T_FLOAT && size == 8;
    case Kind::i64:
      return c == H5T_INTEGER && size == 8 && H5Tget_sign(type) == H5T_SGN_2;
    case Kind::u8:
      return c == H5T_INTEGER && size == 1 && H5Tget_sign(type) == H5T_SGN_NONE;
    case Kind::text:
      return c == H5T_STRING;
  }
  return false;
}

/// The storage-chunk shape of a dataset (its whole shape when not chunked).
std::vector<hsize_t> chunk_shape(hid_t dataset, const std::vector<hsize_t>& dims) {
  Handle dcpl(check_id(H5Dget_create_plist(dataset), "get a dataset's creation list"), H5Pclose);
  std::vector<hsize_t> chunk = dims;
  if (H5Pget_layout(dcpl.get()) == H5D_CHUNKED)
    check(H5Pget_chunk(dcpl.get(), static_cast<int>(dims.size()), chunk.data()), "get a chunk shape");
  for (auto& c : chunk) c = std::max<hsize_t>(c, 1);
  return chunk;
}

}  // namespace

CubeReader::CubeReader(const std::string& path) : path_(path) {
  try {
    file_ = File::open(path, false);
  } catch (const CubeError&) {
    throw InputError(
        path, fs::exists(path) ? "is not an HDF5 file (or is damaged or truncated)" : "does not exist");
  }
  const hid_t root = file_.id();
  try {
    if (!has_attr(root, "format"))
      throw InputError(path, "is an HDF5 file but not a covergrid cube (no format = \"covergrid-cube\")");
    // The version first: older formats stored text where this one does not
    // read it (see get_attr_string).
    const std::int64_t version = has_attr(root, "format_version") ? get_attr_int(root, "format_version") : 0;
    if (version != cube_format_version && version > 0)
      throw InputError(
          path, fmt::format("has cube format version {} (written by covergrid {}); this covergrid reads only "
                            "version {}: run its scenario again with this covergrid, or read it with the one "
                            "that wrote it",
                            version, text_attr_or(root, "tool_version", "?"), cube_format_version));
    if (get_attr_string(root, "format") != cube_format_name || version == 0)
      throw InputError(path, "is an HDF5 file but not a covergrid cube (no format = \"covergrid-cube\")");
    validate();
  } catch (const CubeError& e) {
    throw InputError(path, std::string("is damaged or incomplete as a cube: ") + e.what());
  }
}

/// The one place a cube's layout is checked (issue 11): everything a reader
/// indexes by is proven here, so that no later read runs off a dataset.
void CubeReader::validate() {
  const hid_t root = file_.id();
  auto bad = [&](const std::string& what) -> void { throw InputError(path_, "is damaged: " + what); };

  // Root attributes: present, of their type, and in range.
  auto attr_kind = [&](const std::string& name, Kind kind) {
    if (!has_attr(root, name)) bad(fmt::format("the root attribute {} is missing", name));
    Handle a(check_id(H5Aopen(root, name.c_str(), H5P_DEFAULT), "open attribute " + name), H5Aclose);
    Handle t(check_id(H5Aget_type(a.get()), "get the type of attribute " + name), H5Tclose);
    const bool ok =
        kind == Kind::text ? H5Tget_class(t.get()) == H5T_STRING : H5Tget_class(t.get()) == H5T_INTEGER;
    if (!ok)
      bad(fmt::format("the root attribute {} is not {}", name, kind == Kind::text ? "text" : "an integer"));
  };
  for (const char* name : {"tool_version", "title", "scenario", "scenario_sha256", "created_utc", "shard"})
    attr_kind(name, Kind::text);
  for (const char* name : {"seed", "complete"}) attr_kind(name, Kind::i64);
  const std::int64_t complete = get_attr_int(root, "complete");
  if (complete != 0 && complete != 1)
    bad(fmt::format("the root attribute complete is {}, not 0 or 1", complete));
  complete_ = complete == 1;
  if (get_attr_int(root, "seed") < 0) bad("the root attribute seed is negative");
  shard_ = get_attr_string(root, "shard");
  std::size_t shard_of = 0;
  if (shard_ != "all") {
    unsigned long k = 0, of = 0;
    int used = 0;
    if (std::sscanf(shard_.c_str(), "%lu/%lu%n", &k, &of, &used) != 2 ||
        static_cast<std::size_t>(used) != shard_.size() || k < 1 || k > of)
      bad(fmt::format("the root attribute shard is \"{}\", not \"all\" or K/N with 1 <= K <= N", shard_));
    shard_of = of;
  }
  const std::string text = get_attr_string(root, "scenario");
  if (text.empty()) bad("the root attribute scenario (the scenario text) is empty");
  if (engine::sha256_hex(text) != get_attr_string(root, "scenario_sha256"))
    bad("the root attribute scenario (the scenario text) does not match its scenario_sha256");

  // Datasets: present, of their type; their shape.
  auto dataset_shape = [&](const std::string& name, Kind kind) {
    if (!exists(root, name.substr(1))) bad(fmt::format("dataset {} is missing", name));
    Handle d = open_dataset(root, name);
    Handle t(check_id(H5Dget_type(d.get()), "get the type of " + name), H5Tclose);
    if (!has_kind(t.get(), kind)) bad(fmt::format("dataset {} does not hold {}", name, kind_name(kind)));
    return shape(d.get());
  };
  auto axis_length = [&](const std::string& name, Kind kind) {
    const auto dims = dataset_shape(name, kind);
    if (dims.size() != 1 || dims[0] == 0) bad(fmt::format("dataset {} is not a non-empty 1-D axis", name));
    return dims[0];
  };

  // Every dataset is one the layout knows: one it does not (declared with
  // 2^40 elements, or 10^12 chunks) is refused, never read.
  std::vector<std::string> attained_datasets;  // /models/<label>/p_attained, checked below
  for (const auto& name : dataset_paths(root))
    if (name.starts_with("/models/") && name.ends_with("/p_attained") &&
        name.find('/', 8) == name.size() - 11)
      attained_datasets.push_back(name);
    else if (!known_dataset(name))
      bad(fmt::format("dataset {} is not part of a covergrid cube (format {})", name, cube_format_version));

  // The axes, from /summary (always there): their lengths bounded by what a
  // scenario may ask for before any is read, so that a declared size can
  // make nothing allocate; then their values.
  std::array<hsize_t, 6> length{};
  for (std::size_t i = 0; i < axis_names.size(); ++i) {
    const Kind k = (i == 2 || i == 5) ? Kind::f64 : (i == 4 ? Kind::i64 : Kind::text);
    length[i] = axis_length(std::string("/summary/") + axis_names[i], k);
    const hsize_t limit = i == 0   ? engine::max_stream_models
                          : i == 1 ? 3
                          : i < 4  ? engine::max_combinations
                                   : engine::max_axis_values;
    if (length[i] > limit)
      bad(fmt::format("dataset /summary/{} declares {} values; a cube has at most {}", axis_names[i],
                      length[i], limit));
  }
  const double cells =
      static_cast<double>(length[0]) * static_cast<double>(length[4]) * static_cast<double>(length[5]);
  if (cells > engine::max_grid_cells)
    bad(fmt::format("its axes declare {:.3g} (model, n, p) cells; a cube has at most {:.0e}", cells,
                    engine::max_grid_cells));
  if (length[1] * length[2] * length[3] > engine::max_combinations)
    bad(fmt::format("its axes declare {} (side, level, method) combinations; a cube has at most {}",
                    length[1] * length[2] * length[3], engine::max_combinations));
  models = read_strings(root, "/summary/model");
  for (const auto& name : attained_datasets) {
    if (std::find(models.begin(), models.end(), name.substr(8, name.size() - 19)) == models.end())
      bad(fmt::format("dataset {} belongs to no model of the cube's model axis", name));
    const auto dims = dataset_shape(name, Kind::f64);
    if (dims.size() != 1 || dims[0] != length[5])
      bad(fmt::format("dataset {} does not hold one value per p of the grid", name));
  }
  sides = read_strings(root, "/summary/side");
  levels = read_doubles(root, "/summary/level");
  methods = read_strings(root, "/summary/method");
  n = read_int64s(root, "/summary/n");
  p = read_doubles(root, "/summary/p");
  for (const auto& name : attained_datasets) {
    std::vector<double> values = read_doubles(root, name);
    for (double v : values)
      if (!(v >= 0.0 && v <= 1.0)) bad(fmt::format("dataset {} holds {}, outside [0, 1]", name, v));
    attained_[name.substr(8, name.size() - 19)] = std::move(values);
  }
  auto labels_ok = [&](const std::vector<std::string>& v, const std::string& name) {
    for (std::size_t i = 0; i < v.size(); ++i) {
      if (v[i].empty()) bad(fmt::format("dataset {} has an empty label at index {}", name, i));
      for (std::size_t j = 0; j < i; ++j)
        if (v[j] == v[i]) bad(fmt::format("dataset {} lists \"{}\" twice", name, v[i]));
    }
  };
  labels_ok(models, "/summary/model");
  labels_ok(sides, "/summary/side");
  labels_ok(methods, "/summary/method");
  for (const auto& side : sides) {
    methods::Side parsed;
    if (!methods::parse_side(side, parsed))
      bad(
          fmt::format("dataset /summary/side holds \"{}\", not a known side (two-sided, lower-bound, "
                      "upper-bound)",
                      side));
  }
  for (std::size_t i = 0; i < levels.size(); ++i)
    if (!(levels[i] > 0 && levels[i] < 1) || (i > 0 && !(levels[i] > levels[i - 1])))
      bad(fmt::format("dataset /summary/level holds {} at index {}: levels are increasing, in (0, 1)",
                      levels[i], i));
  for (std::size_t i = 0; i < p.size(); ++i)
    if (!(p[i] >= 0 && p[i] <= 1) || (i > 0 && !(p[i] > p[i - 1])))
      bad(fmt::format("dataset /summary/p holds {} at index {}: p is increasing, in [0, 1]", p[i], i));
  for (std::size_t i = 0; i < n.size(); ++i)
    if (n[i] < 1 || n[i] > 10'000'000 || (i > 0 && n[i] <= n[i - 1]))
      bad(fmt::format("dataset /summary/n holds {} at index {}: n is increasing, in 1..10^7", n[i], i));

  // The other metric groups' copies of the axes must equal /summary's (the
  // string axes carry no checksum: HDF5 filters no variable-length data).
  const bool ex = exists(root, "exact"), mc = exists(root, "mc");
  if (!ex && !mc) bad("neither /exact nor /mc is present");
  for (const std::string group : {"/exact/", "/mc/"}) {
    if (!exists(root, group.substr(1, group.size() - 2))) continue;
    auto differs = [&](const char* axis) {
      bad(fmt::format("dataset {}{} differs from /summary/{} (the copies of an axis must agree)", group, axis,
                      axis));
    };
    for (std::size_t i = 0; i < axis_names.size(); ++i) {
      const std::string name = group + axis_names[i];
      const Kind k = (i == 2 || i == 5) ? Kind::f64 : (i == 4 ? Kind::i64 : Kind::text);
      axis_length(name, k);
      if (k == Kind::text) {
        const auto& mine = i == 0 ? models : i == 1 ? sides : methods;
        if (read_strings(root, name) != mine) differs(axis_names[i]);
      } else if (k == Kind::i64) {
        if (read_int64s(root, name) != n) differs(axis_names[i]);
      } else if (read_doubles(root, name) != (i == 2 ? levels : p)) {
        differs(axis_names[i]);
      }
    }
  }

  // Methods: each label's group with its attributes (all text).
  for (const auto& label : methods) {
    if (!exists(root, "methods/" + label)) bad(fmt::format("group /methods/{} is missing", label));
    Handle g = open_group(root, "/methods/" + label);
    auto& info = method_info[label];
    for (const auto& name : attribute_names(g.get())) info[name] = get_attr_string(g.get(), name);
    if (!info.count("id")) bad(fmt::format("group /methods/{} has no attribute id", label));
  }
  // Sampling models: /models/<label> (absent in cubes written before it; those
  // hold binomial models only). Their text attributes: kind, param.*.
  for (const auto& label : models) {
    if (!exists(root, "models") || !exists(root, "models/" + label)) continue;
    Handle g = open_group(root, "/models/" + label);
    auto& info = model_info[label];
    for (const auto& name : attribute_names(g.get()))
      if (name == "kind" || name.starts_with("param.")) info[name] = get_attr_string(g.get(), name);
    if (!info.count("kind")) bad(fmt::format("group /models/{} has no attribute kind", label));
  }

  // Every dataset's type and shape against the axes.
  const std::vector<hsize_t> dims = {models.size(),  sides.size(), levels.size(),
                                     methods.size(), n.size(),     p.size()};
  const std::vector<hsize_t> sdims(dims.begin(), dims.end() - 1);
  auto shape_text = [](const std::vector<hsize_t>& v) {
    std::string out;
    for (auto x : v) out += (out.empty() ? "" : " x ") + std::to_string(x);
    return out;
  };
  auto expect_shape = [&](const std::string& name, Kind kind, const std::vector<hsize_t>& want) {
    const auto got = dataset_shape(name, kind);
    if (got != want)
      bad(fmt::format("dataset {} has shape {}; its axes give {}", name, shape_text(got), shape_text(want)));
  };
  if (ex)
    for (auto metric : engine::metric_names) expect_shape("/exact/" + std::string(metric), Kind::f64, dims);
  if (mc) {
    for (auto metric : engine::mc_metric_names) expect_shape("/mc/" + std::string(metric), Kind::f64, dims);
    expect_shape("/mc/replicates", Kind::i64, {models.size(), n.size(), p.size()});
  }
  std::vector<std::string> stats;
  if (ex)
    for (auto stat : engine::stat_names) stats.emplace_back(stat);
  if (mc)
    for (std::size_t k = 0; k < engine::grid_stat_count; ++k)
      stats.push_back("mc_" + std::string(engine::stat_names[k]));
  for (const auto& stat : stats) expect_shape("/summary/" + stat, Kind::f64, sdims);

  // Progress: the chunk grid and which chunks are in.
  if (!exists(root, "progress")) bad("group /progress is missing");
  {
    Handle pg = open_group(root, "/progress");
    std::int64_t blk[2] = {0, 0};
    const char* block_names[2] = {"n_block", "p_block"};
    for (int i = 0; i < 2; ++i) {
      if (!has_attr(pg.get(), block_names[i]))
        bad(fmt::format("/progress has no attribute {}", block_names[i]));
      blk[i] = get_attr_int(pg.get(), block_names[i]);
      if (blk[i] < 1) bad(fmt::format("the /progress attribute {} is {}, not >= 1", block_names[i], blk[i]));
    }
    auto blocks = [](std::size_t size, std::int64_t b) {
      return (size + static_cast<std::size_t>(b) - 1) / static_cast<std::size_t>(b);
    };
    const std::size_t chunks = models.size() * blocks(n.size(), blk[0]) * blocks(p.size(), blk[1]);
    expect_shape("/progress/done", Kind::u8, {chunks});
    const auto done = read_u8s(root, "/progress/done");
    for (std::size_t i = 0; i < done.size(); ++i)
      if (done[i] > 1)
        bad(fmt::format("dataset /progress/done holds {} at index {}, not 0 or 1", done[i], i));
    if (shard_ == "all") {
      if (complete_ && std::find(done.begin(), done.end(), 0) != done.end())
        bad("the cube is marked complete but dataset /progress/done lists chunks not computed");
    } else {
      if (shard_of > chunks)
        bad(fmt::format("the root attribute shard is {} but the cube has only {} chunks", shard_, chunks));
      const auto got = dataset_shape("/progress/shard_chunks", Kind::i64);
      if (got.size() != 1) bad("dataset /progress/shard_chunks is not 1-D");
      for (const auto id : read_int64s(root, "/progress/shard_chunks"))
        if (id < 0 || static_cast<std::size_t>(id) >= chunks ||
            (complete_ && !done[static_cast<std::size_t>(id)]))
          bad(fmt::format("dataset /progress/shard_chunks lists chunk {}, not a computed chunk of 0..{}", id,
                          chunks - 1));
    }
  }

  // The values of the summaries (small) and of the replicate counts (one
  // value per cell); the metrics are checked by verify(), chunk by chunk.
  for (const auto& stat : stats) {
    const std::string name = "/summary/" + stat;
    const ValueRange range = stat_range(stat.rfind("mc_", 0) == 0 ? stat.substr(3) : stat);
    const auto values = block(name, std::vector<hsize_t>(sdims.size(), 0), sdims);
    for (std::size_t i = 0; i < values.size(); ++i)
      if (!in_range(values[i], range))
        bad(fmt::format("dataset {} holds {} at flat index {}, outside {}", name, values[i], i,
                        range_text(range)));
  }
  if (mc) {
    double limit = cube_replicates_limit;
    Handle g = open_group(root, "/mc");
    for (const char* a : {"replicates", "max_replicates"})
      if (!has_attr(g.get(), a)) bad(fmt::format("/mc has no attribute {}", a));
    const std::int64_t first = get_attr_int(g.get(), "replicates"),
                       cap = get_attr_int(g.get(), "max_replicates");
    if (first < 0 || static_cast<double>(first) > limit || cap < 0 || static_cast<double>(cap) > limit)
      bad(fmt::format("the /mc attributes replicates = {}, max_replicates = {} are outside 0..{:g}", first,
                      cap, limit));
    limit = static_cast<double>(std::max(first, cap));
    const auto reps = block("/mc/replicates", {0, 0, 0}, {models.size(), n.size(), p.size()});
    for (std::size_t i = 0; i < reps.size(); ++i)
      if (!(reps[i] >= 0 && reps[i] <= limit))
        bad(fmt::format(
            "dataset /mc/replicates holds {} at flat index {}, outside 0..{:g} (the cube's replicates "
            "and max_replicates)",
            reps[i], i, limit));
  }
}

void CubeReader::require_whole() const {
  if (is_shard())
    throw InputError(path_, fmt::format("is shard {} of a scenario, not a whole cube; join the shards with "
                                        "covergrid merge first",
                                        shard_));
  if (!complete_) throw InputError(path_, "is not complete (an unfinished run); finish the run first");
}

std::string CubeReader::attr(const std::string& name) const {
  const hid_t root = file_.id();
  Handle a(check_id(H5Aopen(root, name.c_str(), H5P_DEFAULT), "open attribute " + name), H5Aclose);
  Handle t(check_id(H5Aget_type(a.get()), "get an attribute type"), H5Tclose);
  if (H5Tget_class(t.get()) == H5T_STRING) return get_attr_string(root, name);
  if (H5Tget_class(t.get()) == H5T_INTEGER) return std::to_string(get_attr_int(root, name));
  return fmt::format("{}", get_attr_double(root, name));
}

bool CubeReader::has_exact() const { return exists(file_.id(), "exact/coverage"); }
bool CubeReader::has_mc() const { return exists(file_.id(), "mc/coverage"); }

void refuse_damaged(const std::string& path, const std::string& dataset, const CubeError& e) {
  if (is_checksum_failure(e))
    throw InputError(path,
                     fmt::format("is damaged: dataset {} has a storage chunk that fails its Fletcher-32 "
                                 "checksum; the file was changed after it was written",
                                 dataset));
  throw InputError(path, fmt::format("is damaged: dataset {} cannot be read ({})", dataset, e.what()));
}

std::vector<double> CubeReader::block(const std::string& dataset, const std::vector<hsize_t>& start,
                                      const std::vector<hsize_t>& count) const {
  std::size_t size = 1;
  for (auto v : count) size *= v;
  std::vector<double> out(size);
  try {
    Handle d = open_dataset(file_.id(), dataset);
    read_block(d.get(), start, count, out.data());
  } catch (const CubeError& e) {
    refuse_damaged(path_, dataset, e);
  }
  return out;
}

std::size_t CubeReader::verify() const {
  std::vector<std::string> names;
  try {
    names = dataset_paths(file_.id());
  } catch (const CubeError& e) {
    throw InputError(path_, std::string("is damaged: ") + e.what());
  }
  // The /exact and /mc metrics (not their axes, not the replicate counts,
  // which validate() checked) are read as doubles chunk by chunk and their
  // values checked on the way; every other dataset is read chunk by chunk.
  auto is_metric = [](const std::string& name) {
    for (auto m : engine::mc_metric_names)  // a superset of the exact metric names
      if (name == "/exact/" + std::string(m) || name == "/mc/" + std::string(m)) return true;
    return false;
  };
  for (const auto& name : names) try {
      Handle d = open_dataset(file_.id(), name);
      if (!is_metric(name)) {
        read_every_chunk(d.get(), name);
        continue;
      }
      const auto dims = shape(d.get());
      const auto chunk = chunk_shape(d.get(), dims);
      const std::size_t rank = dims.size();
      std::size_t per_chunk = 1;
      for (auto c : chunk) per_chunk *= c;
      if (per_chunk > max_chunk_elements)
        throw CubeError(
            fmt::format("its storage chunks declare {} elements each; covergrid writes at most {}", per_chunk,
                        max_chunk_elements));
      std::vector<double> buf(per_chunk);
      std::vector<hsize_t> start(rank, 0), count(rank);
      for (bool more = rank > 0 && std::find(dims.begin(), dims.end(), 0) == dims.end(); more;) {
        std::size_t size = 1;
        for (std::size_t i = 0; i < rank; ++i) size *= count[i] = std::min(chunk[i], dims[i] - start[i]);
        read_block(d.get(), start, count, buf.data());
        for (std::size_t i = 0; i < size; ++i)
          if (!in_range(buf[i], probability)) {
            std::string at;
            for (auto v : start) at += (at.empty() ? "" : ", ") + std::to_string(v);
            throw InputError(
                path_, fmt::format("is damaged: dataset {} holds {} in the chunk at [{}], outside {}", name,
                                   buf[i], at, range_text(probability)));
          }
        // Odometer over the chunk grid, last dimension fastest.
        std::size_t i = rank;
        more = false;
        while (i > 0) {
          --i;
          start[i] += chunk[i];
          if (start[i] < dims[i]) {
            more = true;
            break;
          }
          start[i] = 0;
        }
      }
    } catch (const CubeError& e) {
      refuse_damaged(path_, name, e);
    }
  return names.size();
}

const std::vector<double>& CubeReader::attained_p(std::size_t model) const {
  const auto it = attained_.find(models.at(model));
  return it == attained_.end() ? p : it->second;
}

std::vector<double> CubeReader::mc_replicates(std::size_t model, std::size_t n_index) const {
  // Stored as int64; HDF5 converts to double on reading (exact below 2^53).
  return block("/mc/replicates", {model, n_index, 0}, {1, 1, p.size()});
}

std::vector<double> CubeReader::row(const std::string& dataset, std::size_t model, std::size_t side,
                                    std::size_t level, std::size_t method, std::size_t n_index) const {
  return block(dataset, {model, side, level, method, n_index, 0}, {1, 1, 1, 1, 1, p.size()});
}

std::vector<double> CubeReader::rows(const std::string& group, const std::string& metric, std::size_t model,
                                     std::size_t side, std::size_t level, std::size_t method,
                                     std::size_t n_begin, std::size_t n_count) const {
  return block("/" + group + "/" + metric, {model, side, level, method, n_begin, 0},
               {1, 1, 1, 1, n_count, p.size()});
}

std::vector<double> CubeReader::mc_row(const std::string& metric, std::size_t model, std::size_t side,
                                       std::size_t level, std::size_t method, std::size_t n_index) const {
  return row("/mc/" + metric, model, side, level, method, n_index);
}

std::vector<double> CubeReader::summary(const std::string& stat) const {
  const std::string name = "/summary/" + stat;
  std::vector<hsize_t> dims;
  try {
    Handle d = open_dataset(file_.id(), name);
    dims = shape(d.get());
  } catch (const CubeError& e) {
    refuse_damaged(path_, name, e);
  }
  return block(name, std::vector<hsize_t>(dims.size(), 0), dims);
}

std::vector<double> CubeReader::exact_row(const std::string& metric, std::size_t model, std::size_t side,
                                          std::size_t level, std::size_t method, std::size_t n_index) const {
  return row("/exact/" + metric, model, side, level, method, n_index);
}

}  // namespace covergrid::output
