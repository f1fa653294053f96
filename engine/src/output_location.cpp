#include "covergrid/engine/output_location.hpp"

#include <fcntl.h>
#include <fmt/format.h>
#include <limits.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>
#include <filesystem>
#include <random>

namespace covergrid::engine {

namespace fs = std::filesystem;

std::string output_location_problem(const std::string& path) {
  const fs::path target(path);
  fs::path folder = target.parent_path();
  if (folder.empty()) folder = ".";
  std::error_code ec;
  // The nearest existing ancestor tells whether a part of the path is a file.
  if (!fs::exists(folder, ec)) {
    fs::path up = folder;
    while (!up.empty() && !fs::exists(up, ec) && up.has_parent_path() && up.parent_path() != up)
      up = up.parent_path();
    if (!up.empty() && fs::exists(up, ec) && !fs::is_directory(up, ec))
      return up.string() + " is a file, not a folder";
    return "the folder " + folder.string() + " does not exist";
  }
  if (!fs::is_directory(folder, ec)) return folder.string() + " is a file, not a folder";
  // Names the system cannot take, found now rather than after the work: the
  // writers add ".partial" or ".journal" (8 bytes) to the name.
  const std::string name = target.filename().string();
  const long name_max = ::pathconf(folder.c_str(), _PC_NAME_MAX);
  const std::size_t longest_suffix = 8;
  if (name_max > 0 && name.size() + longest_suffix > static_cast<std::size_t>(name_max))
    return fmt::format(
        "the file name is {} bytes long; this folder takes names of at most {} bytes, and the "
        "file written while it is in progress adds {}",
        name.size(), name_max, longest_suffix);
  if (path.size() + longest_suffix >= PATH_MAX)
    return fmt::format("the path is {} bytes long; the system takes at most {}", path.size(), PATH_MAX - 1);
  if (fs::is_directory(target, ec)) return path + " is a folder, not a file";
  // The writers' own files beside the target: a folder in their way would
  // only be found at the end of the work.
  for (const char* suffix : {".partial", ".journal"}) {
    const std::string beside = path + suffix;
    if (fs::is_directory(beside, ec))
      return beside + " is a folder in the way of the file written there while " + path +
             " is in progress; remove or rename it";
  }
  // Probe: the writers create NAME.partial / NAME.journal beside the target
  // and rename into place, so the folder must accept a new file.
  std::random_device rd;
  const fs::path probe = folder / (".covergrid-probe-" + std::to_string(rd()) + std::to_string(getpid()));
  const int fd = ::open(probe.c_str(), O_WRONLY | O_CREAT | O_EXCL, 0600);
  if (fd < 0) return "cannot create files in the folder " + folder.string() + ": " + std::strerror(errno);
  ::close(fd);
  ::unlink(probe.c_str());
  // An existing file is replaced by rename, which needs only the folder.
  return {};
}

namespace {

bool same_file(const std::string& a, const std::string& b) {
  std::error_code ea, eb;
  const fs::path ca = fs::weakly_canonical(fs::absolute(a), ea),
                 cb = fs::weakly_canonical(fs::absolute(b), eb);
  if (ea || eb) return fs::absolute(a).lexically_normal() == fs::absolute(b).lexically_normal();
  return ca == cb;
}

/// Whether `path` starts with the HDF5 signature (HDF5 File Format
/// Specification, "Format Signature": \211HDF\r\n\032\n at offset 0, the
/// only place covergrid's files have it: no user block).
bool is_hdf5(const std::string& path) {
  const int fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) return false;
  char head[8] = {};
  const bool whole = ::read(fd, head, sizeof head) == static_cast<ssize_t>(sizeof head);
  ::close(fd);
  return whole && std::memcmp(head, "\211HDF\r\n\032\n", 8) == 0;
}

}  // namespace

std::string replacement_problem(const std::string& path, const std::vector<std::string>& inputs,
                                Replaces replaces) {
  for (const auto& input : inputs)
    if (!input.empty() && same_file(path, input))
      return fmt::format("is the same file as the input {}; choose another name", input);
  std::error_code ec;
  if (!fs::is_regular_file(path, ec)) return {};
  const bool hdf5 = is_hdf5(path);
  if (replaces == Replaces::text && hdf5)
    return "is an HDF5 file (a cube?); covergrid does not replace it with text: choose another name or "
           "remove it";
  if (replaces == Replaces::cube && !hdf5)
    return "exists and is not an HDF5 file; covergrid replaces only cubes: choose another name or remove it";
  return {};
}

}  // namespace covergrid::engine
