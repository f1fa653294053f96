// Merging shard cubes: validate every input, then replay the chunks from the
// shard cubes into the cube assembly a single run uses.
#include "covergrid/output/merge.hpp"

#include "covergrid/engine/output_location.hpp"
#include "covergrid/engine/error.hpp"
#include "covergrid/engine/run.hpp"
#include "covergrid/engine/shard.hpp"
#include "covergrid/output/cube.hpp"
#include "covergrid/version.hpp"

#include <fmt/format.h>

#include <cstdint>
#include <filesystem>
#include <map>
#include <memory>
#include <optional>

namespace covergrid::output {

namespace fs = std::filesystem;

namespace {

/// What a shard cube says about itself.
struct ShardHeader {
  std::string path;
  std::string sha, tool, scenario_text;
  engine::ShardSpec spec;
  bool complete = false;
  std::int64_t n_block = 0, p_block = 0;
  std::vector<std::int64_t> chunks;
  std::vector<std::uint8_t> done;
};

ShardHeader read_header(const std::string& path) {
  ShardHeader h;
  h.path = path;
  if (!fs::exists(path)) throw InputError(path, "does not exist");
  File f;
  try {
    f = File::open(path, false);
  } catch (const CubeError&) {
    throw InputError(path, "is not an HDF5 file (or is damaged or truncated)");
  }
  const hid_t root = f.id();
  try {
    if (!has_attr(root, "format"))
      throw InputError(path, "is an HDF5 file but not a covergrid cube (no format = \"covergrid-cube\")");
    // The version first: older formats stored text that this one does not read.
    const std::int64_t version = has_attr(root, "format_version") ? get_attr_int(root, "format_version") : 0;
    if (version > 0 && version != cube_format_version)
      throw InputError(path, fmt::format("has cube format version {}; this covergrid writes version {} "
                                         "(merge with the covergrid that ran the shards)",
                                         version, cube_format_version));
    if (get_attr_string(root, "format") != cube_format_name || version == 0)
      throw InputError(path, "is an HDF5 file but not a covergrid cube (no format = \"covergrid-cube\")");
    h.tool = get_attr_string(root, "tool_version");
    if (h.tool != tool_version)
      throw InputError(path, fmt::format("was written by covergrid {}; this is covergrid {} (merge with the "
                                         "covergrid that ran the shards)",
                                         h.tool, tool_version));
    const std::string shard = has_attr(root, "shard") ? get_attr_string(root, "shard") : "all";
    if (shard == "all") throw InputError(path, "is a whole cube (shard = \"all\"), not a shard cube");
    h.spec = engine::parse_shard(shard, path + ": shard =");
    h.complete = get_attr_int(root, "complete") != 0;
    h.sha = get_attr_string(root, "scenario_sha256");
    h.scenario_text = get_attr_string(root, "scenario");
    if (h.complete) {
      Handle pg = open_group(root, "progress");
      h.n_block = get_attr_int(pg.get(), "n_block");
      h.p_block = get_attr_int(pg.get(), "p_block");
      h.done = read_u8s(root, "/progress/done");
      h.chunks = read_int64s(root, "/progress/shard_chunks");
    }
  } catch (const CubeError& e) {
    throw InputError(path, std::string("is damaged as a shard cube: ") + e.what());
  }
  return h;
}

/// Replays shard cubes as the chunks of a whole run: every chunk is complete,
/// read_rows and the final assembly read them from the shard that holds them.
class ShardReplay final : public engine::ResultSink {
 public:
  ShardReplay(const engine::Scenario& s, const engine::Plan& plan, std::vector<std::string> paths,
              std::vector<std::size_t> owner, std::string out_path)
      : s_(s), plan_(plan), paths_(std::move(paths)), owner_(std::move(owner)), out_(std::move(out_path)) {}

  std::vector<char> completed() override { return std::vector<char>(plan_.chunks.size(), 1); }
  void write_chunk(const engine::ChunkResult&) override {
    throw std::logic_error("internal: merge computes no chunks");
  }
  void checkpoint() override {}
  void read_rows(engine::Source source, std::size_t metric, std::size_t model, std::size_t n_begin,
                 std::size_t n_count, std::size_t p_begin, std::size_t p_count,
                 std::vector<double>& out) override {
    const std::size_t n_blocks = (s_.n.size() + plan_.n_block - 1) / plan_.n_block;
    const std::size_t p_blocks = (s_.p.size() + plan_.p_block - 1) / plan_.p_block;
    const std::size_t id = (model * n_blocks + n_begin / plan_.n_block) * p_blocks + p_begin / plan_.p_block;
    const auto& c = plan_.chunks.at(id);
    if (c.n_begin != n_begin || c.n_count != n_count || c.p_begin != p_begin || c.p_count != p_count)
      throw CubeError("internal: read_rows asked for a block that is not one chunk");
    const std::string name = source == engine::Source::exact
                                 ? "/exact/" + std::string(engine::metric_names.at(metric))
                                 : "/mc/" + std::string(engine::mc_metric_names.at(metric));
    out.assign(engine::combo_count(s_) * n_count * p_count, 0.0);
    read_block(open(id), name, metric_start(c), metric_count(c), out);
  }
  void write_grid_stats(engine::Source source, std::size_t model, std::size_t n_begin, std::size_t,
                        const std::vector<double>& stats) override {
    split_[{source == engine::Source::exact ? 0 : 1, model * s_.n.size() + n_begin}] = stats;
  }
  void finish() override {
    const std::string temp = partial_path(out_);
    try {
      assemble_cube(temp, {s_, plan_, nullptr,
                           [this](std::size_t id, engine::ChunkResult& into) { into = load(id); }, split_});
    } catch (const OutOfSpace&) {
      // The user's disk, not a fault: exit 2; merge_shards removes the .partial.
      throw InputError(temp,
                       fmt::format("cannot write the merged cube: {}; free space and run the same merge "
                                   "again (the shard cubes are untouched)",
                                   out_of_space_text));
    }
    current_.reset();
    std::error_code ec;
    fs::rename(temp, out_, ec);
    if (ec) throw CubeError(fmt::format("cannot rename {} to {}: {}", temp, out_, ec.message()));
  }

 private:
  std::vector<hsize_t> metric_start(const engine::ChunkSpec& c) const {
    return {c.model, 0, 0, 0, c.n_begin, c.p_begin};
  }
  std::vector<hsize_t> metric_count(const engine::ChunkSpec& c) const {
    return {1, s_.sides.size(), s_.levels.size(), s_.methods.size(), c.n_count, c.p_count};
  }

  /// The shard file holding chunk `id`; one file is open at a time (the
  /// chunks are read in plan order and each shard is a contiguous run).
  hid_t open(std::size_t id) {
    const std::size_t shard = owner_.at(id);
    if (!current_ || current_shard_ != shard) {
      current_.reset();
      current_ = std::make_unique<File>(File::open(paths_[shard], false));
      current_shard_ = shard;
    }
    return current_->id();
  }

  void read_block(hid_t file, const std::string& name, const std::vector<hsize_t>& start,
                  const std::vector<hsize_t>& count, std::vector<double>& out) const {
    std::size_t size = 1;
    for (auto v : count) size *= v;
    out.resize(size);
    try {
      Handle d = open_dataset(file, name);
      output::require_stored(d.get(), start, count);  // this shard computed the block
      output::read_block(d.get(), start, count, out.data());
    } catch (const CubeError& e) {
      refuse_damaged(paths_[current_shard_], name, e);  // InputError: exit 2, the .partial is removed
    }
  }

  /// Chunk `id` as the run computed it: the same parts present (see
  /// compute_with_tables in engine/src/run.cpp), read from its shard.
  engine::ChunkResult load(std::size_t id) {
    const engine::ChunkSpec& c = plan_.chunks.at(id);
    engine::ChunkResult r;
    r.spec = c;
    r.combos = engine::combo_count(s_);
    const hid_t f = open(id);
    const auto start = metric_start(c), count = metric_count(c);
    const std::vector<hsize_t> sstart(start.begin(), start.end() - 1), scount(count.begin(), count.end() - 1);
    const bool whole_rows = c.p_begin == 0 && c.p_count == s_.p.size();
    r.has_exact = s_.exact;
    r.has_mc = s_.replicates > 0;
    r.has_row_stats = s_.exact && c.p_begin == 0;
    r.has_grid_stats = r.has_exact && whole_rows;
    r.has_mc_grid_stats = r.has_mc && whole_rows;
    if (r.has_exact)
      for (std::size_t k = 0; k < engine::metric_count; ++k)
        read_block(f, "/exact/" + std::string(engine::metric_names[k]), start, count, r.exact[k]);
    if (r.has_row_stats)
      for (std::size_t k = 0; k < r.row_stats.size(); ++k)
        read_block(f, "/summary/" + std::string(engine::stat_names[engine::grid_stat_count + k]), sstart,
                   scount, r.row_stats[k]);
    if (r.has_grid_stats)
      for (std::size_t k = 0; k < engine::grid_stat_count; ++k)
        read_block(f, "/summary/" + std::string(engine::stat_names[k]), sstart, scount, r.grid_stats[k]);
    if (r.has_mc) {
      for (std::size_t k = 0; k < engine::mc_metric_count; ++k)
        read_block(f, "/mc/" + std::string(engine::mc_metric_names[k]), start, count, r.mc[k]);
      read_block(f, "/mc/replicates", {c.model, c.n_begin, c.p_begin}, {1, c.n_count, c.p_count},
                 r.mc_replicates);
    }
    if (r.has_mc_grid_stats)
      for (std::size_t k = 0; k < engine::grid_stat_count; ++k)
        read_block(f, "/summary/mc_" + std::string(engine::stat_names[k]), sstart, scount,
                   r.mc_grid_stats[k]);
    return r;
  }

  const engine::Scenario& s_;
  const engine::Plan& plan_;
  std::vector<std::string> paths_;
  std::vector<std::size_t> owner_;  // shard index per chunk
  std::string out_;
  std::unique_ptr<File> current_;
  std::size_t current_shard_ = 0;
  SplitStats split_;
};

bool same_file(const std::string& a, const std::string& b) {
  std::error_code ec;
  return fs::equivalent(a, b, ec) && !ec;
}

/// "1/4, 3/4" for a list of shard indexes.
std::string shard_list(const std::vector<std::size_t>& indexes, std::size_t count) {
  std::string out;
  for (std::size_t k : indexes) out += (out.empty() ? "" : ", ") + fmt::format("{}/{}", k, count);
  return out;
}

}  // namespace

MergeReport merge_shards(const std::vector<std::string>& shards, const std::string& out_path, bool overwrite,
                         const ScenarioLoader& load, engine::Scenario& scenario) {
  if (shards.empty()) throw InputError("merge", "give the shard cubes to merge");
  // The output: never one of the inputs; its folder must exist; an existing
  // file is replaced only with --overwrite.
  for (const auto& p : shards)
    if (same_file(p, out_path))
      throw InputError(out_path, "is one of the shard cubes to merge; choose another -o");
  if (const std::string problem = engine::output_location_problem(out_path); !problem.empty())
    throw InputError("-o " + out_path, problem);
  if (fs::exists(out_path) && !overwrite)
    throw InputError(out_path, "exists; not touching it (use --overwrite to replace it)");

  std::vector<ShardHeader> headers;
  for (std::size_t i = 0; i < shards.size(); ++i) {
    for (std::size_t j = 0; j < i; ++j)
      if (same_file(shards[i], shards[j]))
        throw InputError(shards[i], "is given twice (also as " + shards[j] + ")");
    headers.push_back(read_header(shards[i]));
    const ShardHeader& h = headers.back();
    if (!h.complete)
      throw InputError(h.path, fmt::format("is an incomplete shard {} (complete = 0); run its shard again "
                                           "(covergrid run SCENARIO --shard {})",
                                           h.spec.label(), h.spec.label()));
  }
  // Every shard validated as a cube reader validates a cube (layout, axes,
  // summaries, replicate counts) and every chunk read (checksums, metric
  // ranges), before anything is created: a shard holding a coverage of 2
  // or a bad replicate count is refused naming the file and the dataset.
  for (const auto& h : headers) CubeReader(h.path).verify();
  // One scenario, one N.
  const ShardHeader& first = headers.front();
  for (const auto& h : headers) {
    if (h.sha != first.sha)
      throw InputError(
          fmt::format("{} and {} are shards of different scenarios (scenario_sha256 {}... and "
                      "{}...); merge the shards of one scenario",
                      first.path, h.path, first.sha.substr(0, 12), h.sha.substr(0, 12)));
    if (h.spec.count != first.spec.count)
      throw InputError(
          fmt::format("{} is shard {} but {} is shard {}: the shards were cut into different "
                      "numbers N",
                      first.path, first.spec.label(), h.path, h.spec.label()));
  }
  const std::size_t N = first.spec.count;
  // Every K exactly once.
  std::vector<const ShardHeader*> by_index(N + 1, nullptr);
  for (const auto& h : headers) {
    if (by_index[h.spec.index])
      throw InputError(fmt::format("{} and {} are both shard {}: the shards overlap",
                                   by_index[h.spec.index]->path, h.path, h.spec.label()));
    by_index[h.spec.index] = &h;
  }
  std::vector<std::size_t> missing;
  for (std::size_t k = 1; k <= N; ++k)
    if (!by_index[k]) missing.push_back(k);
  if (!missing.empty())
    throw InputError(fmt::format(
        "{} of {} shards {} missing: {} (given: {}); run the missing shards (covergrid "
        "run SCENARIO --shard K/{}) and merge all {}",
        missing.size(), N, missing.size() == 1 ? "is" : "are", shard_list(missing, N), shards.size(), N, N));

  // The scenario, from the stored text, and the plan this covergrid makes of it.
  scenario = load(first.scenario_text, first.path + " (its scenario)");
  if (scenario.sha256 != first.sha)
    throw InputError(first.path, "its stored scenario does not match its scenario_sha256");
  scenario.cube_path = out_path;
  const engine::Plan plan = engine::make_plan(scenario);
  std::vector<std::size_t> owner(plan.chunks.size(), SIZE_MAX);
  std::vector<std::string> paths;
  for (std::size_t k = 1; k <= N; ++k) {
    const ShardHeader& h = *by_index[k];
    if (h.n_block != static_cast<std::int64_t>(plan.n_block) ||
        h.p_block != static_cast<std::int64_t>(plan.p_block) || h.done.size() != plan.chunks.size())
      throw InputError(h.path, "was written with a different chunk layout than this covergrid uses");
    if (N > plan.chunks.size())
      throw InputError(h.path, fmt::format("is cut into {} shards but the scenario has only {} chunks", N,
                                           plan.chunks.size()));
    const auto expected = engine::shard_chunks(scenario, plan, h.spec, h.path + ": shard");
    if (std::vector<std::int64_t>(expected.begin(), expected.end()) != h.chunks)
      throw InputError(h.path,
                       fmt::format("holds other chunks than shard {} of this scenario", h.spec.label()));
    for (std::int64_t id : h.chunks) {
      if (!h.done[static_cast<std::size_t>(id)])
        throw InputError(h.path,
                         fmt::format("is an incomplete shard {}: chunk {} is not done", h.spec.label(), id));
      if (owner[static_cast<std::size_t>(id)] != SIZE_MAX)
        throw InputError(fmt::format("{} and {} both hold chunk {}: the shards overlap",
                                     paths[owner[static_cast<std::size_t>(id)]], h.path, id));
      owner[static_cast<std::size_t>(id)] = k - 1;
    }
    paths.push_back(h.path);
  }
  for (std::size_t id = 0; id < owner.size(); ++id)
    if (owner[id] == SIZE_MAX) throw InputError(fmt::format("no shard holds chunk {} of the scenario", id));

  // Everything checked: write.
  ShardReplay replay(scenario, plan, paths, owner, out_path);
  try {
    engine::finish_scenario(scenario, plan, replay);
  } catch (...) {
    std::error_code ec;
    fs::remove(partial_path(out_path), ec);
    throw;
  }
  return {N, plan.chunks.size()};
}

}  // namespace covergrid::output
