#include "covergrid/engine/output_location.hpp"

#include <fcntl.h>
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

}  // namespace covergrid::engine
