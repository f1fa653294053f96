#include "covergrid/output/cube.hpp"

#include "covergrid/engine/error.hpp"
#include "covergrid/methods/registry.hpp"
#include "covergrid/version.hpp"

#include <fmt/format.h>

#include <chrono>
#include <cstdio>
#include <ctime>
#include <filesystem>

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

/// The scenario checksum and completeness of an existing cube, or throws
/// InputError when it is not a readable covergrid cube.
struct Existing {
  std::string sha;
  bool complete;
};

Existing read_existing(const std::string& path) {
  try {
    File f = File::open(path, false);
    const hid_t root = f.id();
    if (!has_attr(root, "format") || get_attr_string(root, "format") != cube_format_name)
      throw InputError(path,
                       "exists and is not a covergrid cube; not touching it (use --overwrite to replace it)");
    return {get_attr_string(root, "scenario_sha256"), get_attr_int(root, "complete") != 0};
  } catch (const CubeError&) {
    throw InputError(
        path, "exists and is not a readable covergrid cube; not touching it (use --overwrite to replace it)");
  }
}

}  // namespace

OutputState inspect_output(const engine::Scenario& scenario, bool overwrite) {
  const std::string& path = scenario.cube_path;
  const std::string temp = partial_path(path);
  if (overwrite) return OutputState::fresh;
  if (fs::exists(path)) {
    const Existing e = read_existing(path);
    if (e.sha != scenario.sha256)
      throw InputError(path,
                       "holds the results of a different scenario (checksum differs); "
                       "use --overwrite to replace it");
    if (e.complete && !fs::exists(temp)) return OutputState::up_to_date;
  }
  if (fs::exists(temp)) {
    Existing e{};
    try {
      e = read_existing(temp);
    } catch (const InputError&) {
      // An unreadable partial file of ours (a run killed mid-flush): start over.
      return OutputState::fresh;
    }
    if (e.sha != scenario.sha256)
      throw InputError(temp,
                       "is an unfinished run of a different scenario; "
                       "use --overwrite to discard it");
    return OutputState::resumed;
  }
  return OutputState::fresh;
}

CubeWriter::CubeWriter(const engine::Scenario& scenario, const engine::Plan& plan, bool resume)
    : scenario_(scenario),
      plan_(plan),
      final_path_(scenario.cube_path),
      temp_path_(partial_path(scenario.cube_path)) {
  if (resume) {
    file_ = File::open(temp_path_, true);
    Handle g = open_group(file_.id(), "/progress");
    if (get_attr_int(g.get(), "n_block") != static_cast<std::int64_t>(plan.n_block) ||
        get_attr_int(g.get(), "p_block") != static_cast<std::int64_t>(plan.p_block) ||
        shape(open_dataset(file_.id(), "/progress/done").get())[0] != plan.chunks.size())
      throw CubeError(temp_path_ + ": its chunk layout differs from this version's plan; use --overwrite");
    for (auto name : engine::metric_names)
      if (scenario.exact) exact_.push_back(open_dataset(file_.id(), "/exact/" + std::string(name)));
    for (auto name : engine::stat_names)
      summary_.push_back(open_dataset(file_.id(), "/summary/" + std::string(name)));
    done_ = open_dataset(file_.id(), "/progress/done");
  } else {
    const fs::path parent = fs::path(temp_path_).parent_path();
    if (!parent.empty() && !fs::is_directory(parent))
      throw InputError(final_path_, "its folder " + parent.string() + " does not exist");
    file_ = File::create(temp_path_);
    create_layout();
  }
}

void CubeWriter::create_layout() {
  const engine::Scenario& s = scenario_;
  const hid_t root = file_.id();
  set_attr(root, "format", std::string(cube_format_name));
  set_attr(root, "format_version", std::int64_t{cube_format_version});
  set_attr(root, "tool_version", std::string(tool_version));
  set_attr(root, "title", s.title);
  set_attr(root, "scenario", s.source_text);
  set_attr(root, "scenario_sha256", s.sha256);
  set_attr(root, "seed", static_cast<std::int64_t>(s.seed));
  set_attr(root, "created_utc", utc_now());
  set_attr(root, "shard", std::string("all"));
  set_attr(root, "complete", std::int64_t{0});

  Handle axes = create_group(root, "axes");
  std::vector<std::string> models, sides, labels;
  for (const auto& m : s.models) models.push_back(m.label);
  for (auto side : s.sides) sides.emplace_back(methods::side_name(side));
  for (const auto& m : s.methods) labels.push_back(m.label);
  std::vector<std::int64_t> ns(s.n.begin(), s.n.end());
  std::vector<Handle> scales;
  scales.push_back(write_vector(axes.get(), "model", models));
  scales.push_back(write_vector(axes.get(), "side", sides));
  scales.push_back(write_vector(axes.get(), "level", s.levels));
  scales.push_back(write_vector(axes.get(), "method", labels));
  scales.push_back(write_vector(axes.get(), "n", ns));
  scales.push_back(write_vector(axes.get(), "p", s.p));
  for (std::size_t i = 0; i < scales.size(); ++i) make_scale(scales[i].get(), axis_names[i]);

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

  const std::vector<hsize_t> dims = {s.models.size(),  s.sides.size(), s.levels.size(),
                                     s.methods.size(), s.n.size(),     s.p.size()};
  const std::vector<hsize_t> chunk = {1, 1, 1, 1, plan_.n_block, plan_.p_block};
  const std::vector<std::string> axis_list(axis_names.begin(), axis_names.end());
  if (s.exact) {
    Handle eg = create_group(root, "exact");
    set_attr(eg.get(), "pmf_tail_bound", 5e-16);
    set_attr(eg.get(), "interval", std::string("closed [L, U]; limits clipped to [0, 1]"));
    for (auto name : engine::metric_names) {
      Handle d = create_double_dataset(eg.get(), std::string(name), dims, chunk);
      set_attr(d.get(), "axes", axis_list);
      for (unsigned i = 0; i < 6; ++i) attach_scale(d.get(), scales[i].get(), i, axis_names[i]);
      exact_.push_back(std::move(d));
    }
  }
  Handle sg = create_group(root, "summary");
  set_attr(sg.get(), "p_range",
           std::vector<std::string>{fmt::format("{}", s.p.front()), fmt::format("{}", s.p.back())});
  const std::vector<hsize_t> sdims(dims.begin(), dims.end() - 1);
  const std::vector<hsize_t> schunk = {1, 1, 1, 1, plan_.n_block};
  const std::vector<std::string> saxes(axis_list.begin(), axis_list.end() - 1);
  for (auto name : engine::stat_names) {
    Handle d = create_double_dataset(sg.get(), std::string(name), sdims, schunk);
    set_attr(d.get(), "axes", saxes);
    for (unsigned i = 0; i < 5; ++i) attach_scale(d.get(), scales[i].get(), i, axis_names[i]);
    summary_.push_back(std::move(d));
  }
  Handle pg = create_group(root, "progress");
  set_attr(pg.get(), "n_block", static_cast<std::int64_t>(plan_.n_block));
  set_attr(pg.get(), "p_block", static_cast<std::int64_t>(plan_.p_block));
  done_ = write_vector(pg.get(), "done", std::vector<std::uint8_t>(plan_.chunks.size(), 0));
  file_.flush();
}

std::vector<char> CubeWriter::completed() {
  const auto flags = read_u8s(file_.id(), "/progress/done");
  return std::vector<char>(flags.begin(), flags.end());
}

void CubeWriter::write_chunk(const engine::ChunkResult& r) {
  const auto& c = r.spec;
  const std::size_t S = scenario_.sides.size(), L = scenario_.levels.size(), M = scenario_.methods.size();
  if (r.has_exact) {
    const std::vector<hsize_t> start = {c.model, 0, 0, 0, c.n_begin, c.p_begin};
    const std::vector<hsize_t> count = {1, S, L, M, c.n_count, c.p_count};
    for (std::size_t k = 0; k < engine::metric_count; ++k)
      write_block(exact_[k].get(), start, count, r.exact[k].data());
  }
  if (r.has_grid_stats) {
    const std::vector<hsize_t> start = {c.model, 0, 0, 0, c.n_begin};
    const std::vector<hsize_t> count = {1, S, L, M, c.n_count};
    for (std::size_t k = 0; k < r.grid_stats.size(); ++k)
      write_block(summary_[k].get(), start, count, r.grid_stats[k].data());
  }
  if (r.has_row_stats) {
    const std::vector<hsize_t> start = {c.model, 0, 0, 0, c.n_begin};
    const std::vector<hsize_t> count = {1, S, L, M, c.n_count};
    for (std::size_t k = 0; k < r.row_stats.size(); ++k)
      write_block(summary_[engine::grid_stat_count + k].get(), start, count, r.row_stats[k].data());
  }
  pending_.push_back(c.id);
}

void CubeWriter::checkpoint() {
  // Data first, then the flags that declare it complete, each flushed.
  file_.flush();
  const std::uint8_t one = 1;
  for (std::size_t id : pending_) write_block_u8(done_.get(), {id}, {1}, &one);
  pending_.clear();
  file_.flush();
}

void CubeWriter::read_rows(Metric metric, std::size_t model, std::size_t n_begin, std::size_t n_count,
                           std::size_t p_begin, std::size_t p_count, std::vector<double>& out) {
  const std::size_t S = scenario_.sides.size(), L = scenario_.levels.size(), M = scenario_.methods.size();
  out.assign(S * L * M * n_count * p_count, std::numeric_limits<double>::quiet_NaN());
  if (!scenario_.exact) return;
  read_block(exact_[engine::index(metric)].get(), {model, 0, 0, 0, n_begin, p_begin},
             {1, S, L, M, n_count, p_count}, out.data());
}

void CubeWriter::write_grid_stats(std::size_t model, std::size_t n_begin, std::size_t n_count,
                                  const std::vector<double>& stats) {
  const std::size_t S = scenario_.sides.size(), L = scenario_.levels.size(), M = scenario_.methods.size();
  const std::size_t block = S * L * M * n_count;
  for (std::size_t k = 0; k < engine::grid_stat_count; ++k)
    write_block(summary_[k].get(), {model, 0, 0, 0, n_begin}, {1, S, L, M, n_count},
                stats.data() + k * block);
}

void CubeWriter::finish() {
  set_attr(file_.id(), "complete", std::int64_t{1});
  exact_.clear();
  summary_.clear();
  done_.reset();
  file_.flush();
  file_.close();
  std::error_code ec;
  fs::rename(temp_path_, final_path_, ec);
  if (ec) throw CubeError(fmt::format("cannot rename {} to {}: {}", temp_path_, final_path_, ec.message()));
}

// ---------------------------------------------------------------- reading

CubeReader::CubeReader(const std::string& path) : path_(path) {
  try {
    file_ = File::open(path, false);
  } catch (const CubeError&) {
    throw InputError(path, fs::exists(path) ? "is not an HDF5 file" : "does not exist");
  }
  const hid_t root = file_.id();
  try {
    if (!has_attr(root, "format") || get_attr_string(root, "format") != cube_format_name)
      throw InputError(path, "is an HDF5 file but not a covergrid cube (no format = \"covergrid-cube\")");
    const std::int64_t version = get_attr_int(root, "format_version");
    if (version != cube_format_version)
      throw InputError(path, fmt::format("has cube format version {}; this covergrid reads version {}",
                                         version, cube_format_version));
    complete_ = get_attr_int(root, "complete") != 0;
    models = read_strings(root, "/axes/model");
    sides = read_strings(root, "/axes/side");
    levels = read_doubles(root, "/axes/level");
    methods = read_strings(root, "/axes/method");
    n = read_int64s(root, "/axes/n");
    p = read_doubles(root, "/axes/p");
    for (const auto& label : methods) {
      Handle g = open_group(root, "/methods/" + label);
      auto& info = method_info[label];
      H5O_info_t oinfo;
      check(H5Oget_info2(g.get(), &oinfo, H5O_INFO_NUM_ATTRS), "read method attributes");
      for (hsize_t i = 0; i < oinfo.num_attrs; ++i) {
        char name[256];
        const ssize_t len =
            H5Aget_name_by_idx(g.get(), ".", H5_INDEX_NAME, H5_ITER_INC, i, name, sizeof name, H5P_DEFAULT);
        if (len < 0) throw CubeError("cannot read a method attribute name");
        info[name] = get_attr_string(g.get(), name);
      }
    }
  } catch (const CubeError& e) {
    throw InputError(path, std::string("is damaged or incomplete as a cube: ") + e.what());
  }
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

std::vector<double> CubeReader::summary(const std::string& stat) const {
  Handle d = open_dataset(file_.id(), "/summary/" + stat);
  const auto dims = shape(d.get());
  std::size_t total = 1;
  for (auto v : dims) total *= v;
  std::vector<double> out(total);
  read_block(d.get(), std::vector<hsize_t>(dims.size(), 0), dims, out.data());
  return out;
}

std::vector<double> CubeReader::exact_row(const std::string& metric, std::size_t model, std::size_t side,
                                          std::size_t level, std::size_t method, std::size_t n_index) const {
  Handle d = open_dataset(file_.id(), "/exact/" + metric);
  std::vector<double> out(p.size());
  read_block(d.get(), {model, side, level, method, n_index, 0}, {1, 1, 1, 1, 1, p.size()}, out.data());
  return out;
}

}  // namespace covergrid::output
