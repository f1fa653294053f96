#pragma once
/// The result cube (layout: README, "The result cube"): writing it as a ResultSink, with
/// resume, and reading it back.
///
/// Layout (format version 2): root attributes format, format_version,
/// tool_version, title, scenario, scenario_sha256, seed, created_utc, shard,
/// complete; /methods/<label> groups; metric groups /exact (float64
/// [model, side, level, method, n, p] per metric), /mc (the same, and int64
/// replicates [model, n, p]) and /summary (float64 [model, side, level,
/// method, n] per statistic), each holding its own copy of the axes
/// {model,side,level,method,n,p} as dimension scales, so that netCDF-4
/// readers see each group as labelled arrays; every metric dataset carries
/// long_name and units; /progress/done uint8 [chunk] with attributes n_block
/// and p_block. Every dataset is chunked with a Fletcher-32 checksum. A shard cube (run
/// --shard K/N) has the same layout with only its chunks written: shard =
/// "K/N", /progress/done 1 for its chunks, /progress/shard_chunks (int64, its
/// chunk ids), complete = 1 once every one of them is in; the grid statistics
/// of rows split over several chunks are left NaN (merge computes them).
#include "covergrid/engine/plan.hpp"
#include "covergrid/engine/scenario.hpp"
#include "covergrid/engine/shard.hpp"
#include "covergrid/engine/sink.hpp"
#include "covergrid/output/hdf5.hpp"

#include <array>
#include <functional>
#include <map>
#include <memory>
#include <atomic>
#include <chrono>
#include <cstdint>
#include <stdexcept>
#include <string>
#include <vector>

namespace covergrid::output {

inline constexpr const char* cube_format_name = "covergrid-cube";
inline constexpr std::array<const char*, 6> axis_names = {"model", "side", "level", "method", "n", "p"};

/// While a run is in progress its results go to an append-only journal
/// beside the cube (`CUBE.journal`): a header with the scenario checksum and
/// the chunk layout, then one record per finished chunk (length and checksum
/// guarded). A killed run leaves at worst a torn last record, which resume
/// drops; nothing complete is lost. Each chunk also goes into the HDF5 cube
/// under a temporary name (`CUBE.partial`) as soon as its record is written
/// (CubeAssembly); when every chunk is in, the cube is finished, renamed into
/// place, and the journal removed.
std::string journal_path(const std::string& cube_path);
std::string partial_path(const std::string& cube_path);

/// What preparing the output found.
enum class OutputState { fresh, resumed, up_to_date };

/// Decides, before anything is written, what a run of `scenario` into its cube
/// path will do: start fresh, resume an unfinished run of the same scenario,
/// or find a complete cube of it. Throws InputError (exit 2) for a cube or an
/// unfinished run of a different scenario, a cube of another shard (`shard`
/// is "all" or "K/N"), or a foreign file in the way, unless `overwrite`.
OutputState inspect_output(const engine::Scenario& scenario, bool overwrite,
                           const std::string& shard = "all");

/// A chunk's results as the bytes of one journal record, and back (the
/// caller sets r.spec and r.combos first). Used by the MPI ranks to ship
/// results to the rank that writes the journal.
std::string encode_chunk(const engine::ChunkResult& r);
void decode_chunk(const char* data, std::size_t size, engine::ChunkResult& r);

/// Grid statistics of split rows, [source][model * N + n][stat * combos + combo].
using SplitStats = std::map<std::pair<int, std::size_t>, std::vector<double>>;

/// Everything a cube is assembled from: the chunks come one at a time, in
/// plan order, from `load` (the journal of a run, or shard cubes in merge).
struct CubeContents {
  const engine::Scenario& scenario;
  const engine::Plan& plan;
  const engine::ShardSelection* shard;  // nullptr: the whole scenario
  /// Fills `into` with the chunk's results (its vectors reused from call
  /// to call, so that assembling touches no fresh memory per chunk).
  std::function<void(std::size_t chunk, engine::ChunkResult& into)> load;
  const SplitStats& split_stats;
};

/// The HDF5 cube being written at `path` (truncated): every group, axis and
/// dataset made on construction (complete = 0), then the chunks in any
/// order (add; the datasets' values do not depend on the order), then
/// finish() with the split rows' statistics and the progress record
/// (complete = 1). A run adds each chunk as it is computed, beside its
/// journal record, so that the assembly overlaps the computation.
class CubeAssembly {
 public:
  CubeAssembly(const std::string& path, const engine::Scenario& scenario, const engine::Plan& plan,
               const engine::ShardSelection* shard);
  void add(const engine::ChunkResult& r);
  /// Adds, in plan order, every chunk this cube holds (all, or the shard's)
  /// that is not in yet, each filled by `load`.
  void add_missing(const std::function<void(std::size_t chunk, engine::ChunkResult& into)>& load);
  /// Needs every chunk that belongs added.
  void finish(const SplitStats& split_stats);

 private:
  const engine::Scenario& s_;
  const engine::Plan& plan_;
  const engine::ShardSelection* shard_;
  File file_;
  std::size_t S_ = 0, L_ = 0, M_ = 0;
  std::vector<hsize_t> chunk_;  // a metric's storage chunk
  bool direct_ = false;         // the metrics take whole chunks (takes_whole_chunks)
  std::vector<Handle> exact_, mc_, stats_, mc_stats_;
  Handle mc_reps_;
  std::vector<std::uint8_t> done_, added_;
};

/// Writes the HDF5 cube to `path` (truncating it) from `contents`, the chunks
/// in plan order; complete = 1 at the end.
void assemble_cube(const std::string& path, const CubeContents& contents);

/// Thrown by CubeWriter::finish() when the stop flag (set_stop) was raised
/// while the cube was being assembled: the .partial is removed and the
/// journal kept whole, so the same command assembles the cube again.
class Interrupted : public std::runtime_error {
 public:
  using std::runtime_error::runtime_error;
};

/// The ResultSink that writes the journal and, on finish(), the cube.
class CubeWriter final : public engine::ResultSink {
 public:
  /// Opens (resume: validating the journal and dropping a torn tail) or
  /// creates the journal; call inspect_output() first. With `shard`, the cube
  /// written on finish() is that shard's (only its chunks).
  CubeWriter(const engine::Scenario& scenario, const engine::Plan& plan, bool resume,
             const engine::ShardSelection* shard = nullptr);
  ~CubeWriter() override;
  CubeWriter(const CubeWriter&) = delete;
  CubeWriter& operator=(const CubeWriter&) = delete;

  std::vector<char> completed() override;
  void write_chunk(const engine::ChunkResult& result) override;
  /// Appends an already encoded chunk (encode_chunk) to the journal.
  void write_encoded(std::size_t chunk, const std::string& payload);
  /// Syncs the journal to the disk when sync_interval has passed since the
  /// last sync (write() alone already keeps it from a killed process).
  void checkpoint() override;
  /// Syncs the journal now: for a run that stops unfinished.
  void sync();
  static constexpr std::chrono::seconds sync_interval{5};
  void read_rows(engine::Source source, std::size_t metric, std::size_t model, std::size_t n_begin,
                 std::size_t n_count, std::size_t p_begin, std::size_t p_count,
                 std::vector<double>& out) override;
  void write_grid_stats(engine::Source source, std::size_t model, std::size_t n_begin, std::size_t n_count,
                        const std::vector<double>& stats) override;
  void finish() override;
  /// A flag (raised by SIGINT or SIGTERM) that finish() checks before each
  /// chunk it assembles; it then throws Interrupted.
  void set_stop(const std::atomic<bool>* stop) { stop_ = stop; }
  /// After a resume: one line saying which damaged journal records were
  /// dropped and why (their chunks are computed again); "" when none were.
  const std::string& resume_note() const { return resume_note_; }
  /// After a run failed or stopped: removes the journal when this writer
  /// created it and no chunk reached it, so that a run that fails before its
  /// first chunk leaves nothing behind; true when it did. The writer is then
  /// unusable.
  bool discard_if_empty();

 private:
  void read_record(std::size_t chunk, engine::ChunkResult& into) const;
  /// Appends record_ (header space, then the payload) to the journal, its
  /// header filled in place.
  void append_record(std::size_t chunk);
  /// Throws the InputError for `path` that could not be written for want of
  /// space (`doing`: " the cube" or ""), saying how many chunks are saved.
  [[noreturn]] void refuse_out_of_space(const std::string& path, const std::string& doing) const;
  const engine::Scenario& scenario_;
  const engine::Plan& plan_;
  const engine::ShardSelection* shard_;
  std::string final_path_, journal_path_, temp_path_;
  int fd_ = -1;
  std::vector<std::int64_t> offsets_;  // record offset per chunk, -1 = not written
  std::uint64_t end_ = 0;              // end of the last valid record
  // Buffers reused from record to record: a fresh one each time costs page
  // faults and zeroing on every chunk (measured: `scripts/bench whole`).
  std::string record_;
  mutable std::vector<char> read_buffer_;
  bool created_ = false;       // this writer created the journal (no resume)
  std::size_t written_ = 0;    // chunks this writer appended
  std::uint32_t version_ = 2;  // the journal's format version (records are written in it)
  std::string resume_note_;
  SplitStats split_stats_;
  const std::atomic<bool>* stop_ = nullptr;
  std::chrono::steady_clock::time_point last_sync_ = std::chrono::steady_clock::now();
  /// The cube under its temporary name, open from the first chunk written
  /// on: each chunk computed here goes into it beside its journal record;
  /// finish() adds the chunks only the journal holds (a resumed run's, a
  /// remote rank's) and closes it. Removed if the writer ends unfinished.
  std::unique_ptr<CubeAssembly> assembly_;
  bool progressive_failed_ = false;  // the cube could not be written while running: finish() builds it
  void open_assembly();
  void drop_assembly();
};

/// Throws the InputError for a dataset of `path` that cannot be read: a
/// storage chunk failing its checksum, or another HDF5 failure `e`.
[[noreturn]] void refuse_damaged(const std::string& path, const std::string& dataset, const CubeError& e);

/// The most Monte Carlo replicates a cube's cell may hold (the scenario
/// loader's limit per cell, scenarios::max_replicates_per_cell).
inline constexpr double cube_replicates_limit = 1e10;

/// A cube opened for reading. The constructor validates the whole layout
/// before anything uses it (validate(): the format and version, the root
/// attributes, the scenario text against its SHA-256, every group's axes
/// against each other and against every dataset's shape and type, the
/// progress record, and the values of the axes, the summaries and the
/// replicate counts): InputError (exit 2) naming the file and the dataset or
/// attribute. Every read verifies the checksums of the chunks it touches; a
/// damaged chunk is an InputError naming the file and the dataset.
class CubeReader {
 public:
  explicit CubeReader(const std::string& path);

  const std::string& path() const { return path_; }
  std::string attr(const std::string& name) const;
  bool complete() const { return complete_; }
  /// "all" for a whole cube, "K/N" for a shard cube (run --shard).
  const std::string& shard() const { return shard_; }
  bool is_shard() const { return shard_ != "all"; }

  std::vector<std::string> models, sides, methods;
  std::vector<double> levels, p;
  std::vector<std::int64_t> n;
  /// Per method label: its attributes (id, name, family, reference, param.*).
  std::map<std::string, std::map<std::string, std::string>> method_info;
  /// Per model label: its kind and param.* attributes (empty for cubes
  /// written before /models existed, whose models are all binomial).
  std::map<std::string, std::map<std::string, std::string>> model_info;

  /// Reads every chunk of every dataset (verifying every checksum, and the
  /// value range of every /exact and /mc metric as its chunks are read);
  /// returns the number of datasets. InputError at the first damaged chunk
  /// or value out of range.
  std::size_t verify() const;
  /// InputError unless the cube is complete and a whole cube (not a shard):
  /// what rank, report and inspect --pair need.
  void require_whole() const;

  bool has_exact() const;
  bool has_mc() const;
  /// The p a model evaluated for each grid p: /models/<label>/p_attained
  /// for a model that snaps p (a finite population's K/N), else p itself.
  const std::vector<double>& attained_p(std::size_t model) const;
  /// Monte Carlo replicates per p for (model, n index).
  std::vector<double> mc_replicates(std::size_t model, std::size_t n_index) const;
  /// One Monte Carlo metric over p for a single (model, side, level, method, n).
  std::vector<double> mc_row(const std::string& metric, std::size_t model, std::size_t side,
                             std::size_t level, std::size_t method, std::size_t n_index) const;
  /// A summary statistic, whole, laid out [model][side][level][method][n].
  std::vector<double> summary(const std::string& stat) const;
  /// One exact metric over p for a single (model, side, level, method, n).
  std::vector<double> exact_row(const std::string& metric, std::size_t model, std::size_t side,
                                std::size_t level, std::size_t method, std::size_t n_index) const;
  /// Rows n_begin .. n_begin + n_count - 1 of one metric of `group` ("exact"
  /// or "mc") for a single (model, side, level, method), laid out [n][p];
  /// reading whole blocks spares decompressing a storage chunk once per row.
  std::vector<double> rows(const std::string& group, const std::string& metric, std::size_t model,
                           std::size_t side, std::size_t level, std::size_t method, std::size_t n_begin,
                           std::size_t n_count) const;
  std::size_t summary_index(std::size_t model, std::size_t side, std::size_t level, std::size_t method,
                            std::size_t n_index) const {
    return (((model * sides.size() + side) * levels.size() + level) * methods.size() + method) * n.size() +
           n_index;
  }

 private:
  std::vector<double> row(const std::string& dataset, std::size_t model, std::size_t side, std::size_t level,
                          std::size_t method, std::size_t n_index) const;
  void validate();
  std::vector<double> block(const std::string& dataset, const std::vector<hsize_t>& start,
                            const std::vector<hsize_t>& count) const;
  std::string path_;
  File file_;
  bool complete_ = false;
  std::string shard_ = "all";
  std::map<std::string, std::vector<double>> attained_;  // per model label that snaps p
};

}  // namespace covergrid::output
