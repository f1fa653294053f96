// libFuzzer target: the cube reader. Each input is written to a file and
// read as inspect reads a cube: validated (attributes, axes, shapes, sizes
// against the layout, the scenario checksum) and verified (every chunk's
// checksum and the metrics' ranges). The only allowed refusal is an
// InputError naming the file; a hang is caught by libFuzzer's -timeout.
#include "covergrid/engine/error.hpp"
#include "covergrid/output/cube.hpp"

#include <unistd.h>

#include <cstdint>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <string>

namespace fs = std::filesystem;

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  static const fs::path path =
      fs::temp_directory_path() / ("covergrid-fuzz-cube-" + std::to_string(::getpid()) + ".h5");
  std::ofstream(path, std::ios::binary | std::ios::trunc)
      .write(reinterpret_cast<const char*>(data), static_cast<std::streamsize>(size));
  try {
    const covergrid::output::CubeReader cube(path.string());
    cube.verify();
  } catch (const covergrid::InputError& e) {
    if (std::string(e.what()).rfind(path.string(), 0) != 0) std::abort();  // names the file first
  }
  return 0;
}
