#pragma once
/// Checks an output location before any work starts: its folder exists, is a
/// folder, and accepts a new file; the path itself is not a folder. Every
/// command that writes (run: cube, journal, tables; report; audit -o; merge
/// -o) calls it first, so a run never computes for an hour and then finds it
/// cannot write.
#include <string>
#include <vector>

namespace covergrid::engine {

/// Empty when `path` can be written (created or replaced by rename in its
/// folder, with no folder at PATH.partial or PATH.journal, the names the
/// writers use while they work); otherwise what is wrong, with the system's
/// reason, e.g.
/// "cannot create files in the folder out: Read-only file system" or
/// "base.toml is a file, not a folder". Probes by creating and removing a
/// uniquely named empty file in the folder; leaves nothing behind.
std::string output_location_problem(const std::string& path);

/// What an output replaces when a file is already at its path.
enum class Replaces {
  text,  // a table, verdict or report: any existing file but an HDF5 one
  cube,  // a cube (run --overwrite, merge --overwrite): only an HDF5 file
};

/// Empty when writing `path` destroys nothing covergrid must keep; else why
/// not: `path` is the same file as one of `inputs` (compared with symbolic
/// links resolved), or an existing file of the other kind than `replaces`
/// allows (`audit -o CUBE.h5` would put verdict text in place of a cube;
/// `run --overwrite` would put a cube in place of a text file it did not
/// write).
std::string replacement_problem(const std::string& path, const std::vector<std::string>& inputs,
                                Replaces replaces);

}  // namespace covergrid::engine
