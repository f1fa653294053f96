#pragma once
// Helpers for the end-to-end tests: running the built executable as a child
// process, and comparing two cubes dataset by dataset and attribute by
// attribute.
#include "covergrid/output/hdf5.hpp"

#include <catch2/catch.hpp>
#include <hdf5.h>
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <cstdio>
#include <filesystem>
#include <map>
#include <set>
#include <string>
#include <thread>
#include <vector>

namespace covergrid::test {

/// Starts `program` (default: the covergrid executable) in `dir` with
/// `args`; stdout goes to /dev/null, stderr to dir/stderr.txt. Returns its pid.
inline pid_t spawn(const std::filesystem::path& dir, const std::vector<std::string>& args,
                   const std::string& program = COVERGRID_EXE) {
  const pid_t pid = fork();
  if (pid == 0) {
    if (chdir(dir.c_str()) != 0) _exit(126);
    std::vector<char*> argv;
    argv.push_back(const_cast<char*>(program.c_str()));
    for (const auto& a : args) argv.push_back(const_cast<char*>(a.c_str()));
    argv.push_back(nullptr);
    if (!freopen("/dev/null", "w", stdout)) _exit(126);
    if (!freopen((dir / "stderr.txt").c_str(), "w", stderr)) _exit(126);
    execv(program.c_str(), argv.data());
    _exit(127);
  }
  return pid;
}

/// The exit status, or 128 + signal. A child still running after
/// `limit_seconds` is killed (SIGKILL) and reported as 128 + 9, so that no
/// test of damaged or hostile input can hang the suite; the limit is far
/// above what any case here takes (seconds).
inline int wait_status(pid_t pid, int limit_seconds = 240) {
  const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(limit_seconds);
  int status = 0;
  for (;;) {
    const pid_t r = waitpid(pid, &status, WNOHANG);
    if (r == pid) break;
    if (r < 0) return 127;
    if (std::chrono::steady_clock::now() > deadline) {
      kill(pid, SIGKILL);
      waitpid(pid, &status, 0);
      break;
    }
    std::this_thread::sleep_for(std::chrono::milliseconds(2));
  }
  return WIFEXITED(status) ? WEXITSTATUS(status) : 128 + WTERMSIG(status);
}

inline int run(const std::filesystem::path& dir, const std::vector<std::string>& args) {
  return wait_status(spawn(dir, args));
}

/// Waits (up to a minute) until `file` exists and holds more than `bytes`:
/// the run is then part-way through its chunks.
inline void wait_for_bytes(const std::filesystem::path& file, std::uintmax_t bytes) {
  const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(60);
  while (std::chrono::steady_clock::now() < deadline) {
    std::error_code ec;
    const auto size = std::filesystem::file_size(file, ec);
    if (!ec && size > bytes) return;
    std::this_thread::sleep_for(std::chrono::milliseconds(5));
  }
}

/// Every object path in a file (groups and datasets), in name order.
inline std::vector<std::string> objects(hid_t file, bool datasets_only) {
  struct Visit {
    std::vector<std::string> names;
    bool datasets_only;
  } visit{{}, datasets_only};
  H5Lvisit(
      file, H5_INDEX_NAME, H5_ITER_INC,
      [](hid_t g, const char* name, const H5L_info_t*, void* data) -> herr_t {
        auto* v = static_cast<Visit*>(data);
        H5O_info_t info;
        if (H5Oget_info_by_name2(g, name, &info, H5O_INFO_BASIC, H5P_DEFAULT) >= 0 &&
            (!v->datasets_only || info.type == H5O_TYPE_DATASET))
          v->names.push_back(name);
        return 0;
      },
      &visit);
  return visit.names;
}

inline std::vector<std::string> datasets(hid_t file) { return objects(file, true); }

/// The raw bytes of a numeric dataset, or its strings joined.
inline std::string contents(hid_t file, const std::string& name) {
  namespace o = covergrid::output;
  o::Handle d = o::open_dataset(file, name);
  o::Handle type(H5Dget_type(d.get()), H5Tclose);
  if (H5Tget_class(type.get()) == H5T_STRING) {
    std::string all;
    for (const auto& s : o::read_strings(file, name)) all += s + '\n';
    return all;
  }
  o::Handle native(H5Tget_native_type(type.get(), H5T_DIR_ASCEND), H5Tclose);
  std::size_t count = 1;
  for (auto v : o::shape(d.get())) count *= v;
  std::string bytes(count * H5Tget_size(native.get()), '\0');
  if (count) H5Dread(d.get(), native.get(), H5S_ALL, H5S_ALL, H5P_DEFAULT, bytes.data());
  return bytes;
}

/// Checks that two cubes hold the same datasets with identical bytes.
inline void same_datasets(const std::string& a, const std::string& b) {
  namespace o = covergrid::output;
  o::File fa = o::File::open(a, false), fb = o::File::open(b, false);
  const auto names = datasets(fa.id());
  CHECK(names == datasets(fb.id()));
  CHECK(names.size() > 20);  // an exact-only cube has 27, with Monte Carlo 46
  for (const auto& name : names) {
    INFO(name);
    CHECK(contents(fa.id(), name) == contents(fb.id(), name));
  }
}

/// Every attribute of every object, as "object @ name" -> value bytes (strings
/// as text). Attributes holding HDF5 object references (the dimension-scale
/// bookkeeping DIMENSION_LIST and REFERENCE_LIST) are left out: they hold
/// file addresses, not data.
inline std::map<std::string, std::string> attributes(const std::string& path) {
  namespace o = covergrid::output;
  o::File f = o::File::open(path, false);
  std::vector<std::string> names = objects(f.id(), false);
  names.insert(names.begin(), ".");
  std::map<std::string, std::string> out;
  for (const auto& object : names) {
    o::Handle obj(H5Oopen(f.id(), object.c_str(), H5P_DEFAULT), H5Oclose);
    H5O_info_t info;
    H5Oget_info2(obj.get(), &info, H5O_INFO_NUM_ATTRS);
    for (hsize_t i = 0; i < info.num_attrs; ++i) {
      o::Handle a(H5Aopen_by_idx(obj.get(), ".", H5_INDEX_NAME, H5_ITER_INC, i, H5P_DEFAULT, H5P_DEFAULT),
                  H5Aclose);
      char name[256];
      H5Aget_name(a.get(), sizeof name, name);
      o::Handle type(H5Aget_type(a.get()), H5Tclose);
      o::Handle space(H5Aget_space(a.get()), H5Sclose);
      const auto count = static_cast<std::size_t>(H5Sget_simple_extent_npoints(space.get()));
      const H5T_class_t cls = H5Tget_class(type.get());
      std::string value;
      if (cls == H5T_REFERENCE || cls == H5T_COMPOUND || cls == H5T_VLEN) continue;
      if (cls == H5T_STRING && H5Tis_variable_str(type.get()) > 0) {
        std::vector<char*> raw(count, nullptr);
        H5Aread(a.get(), type.get(), raw.data());
        for (char* s : raw) value += std::string(s ? s : "") + '\n';
        H5Dvlen_reclaim(type.get(), space.get(), H5P_DEFAULT, raw.data());  // HDF5 1.10
      } else {
        value.assign(count * H5Tget_size(type.get()), '\0');
        H5Aread(a.get(), type.get(), value.data());
      }
      out[object + " @ " + name] = value;
    }
  }
  return out;
}

/// Checks that two cubes carry the same attributes, except those in `except`
/// ("object @ name", e.g. ". @ created_utc").
inline void same_attributes(const std::string& a, const std::string& b, const std::set<std::string>& except) {
  auto x = attributes(a), y = attributes(b);
  CHECK(x.size() > 40);
  for (const auto& key : except) {
    x.erase(key);
    y.erase(key);
  }
  CHECK(x.size() == y.size());
  for (const auto& [key, value] : x) {
    INFO(key);
    REQUIRE(y.count(key) == 1);
    CHECK(y.at(key) == value);
  }
}

}  // namespace covergrid::test
