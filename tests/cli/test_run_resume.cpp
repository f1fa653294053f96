// The run command end to end with Monte Carlo: byte-identical datasets for
// 1 and 2 threads; a run killed with SIGKILL mid-way and resumed ends with the
// same cube; SIGINT stops cleanly at a chunk boundary, resumably.
#include "support.hpp"

#include "covergrid/output/hdf5.hpp"

#include <catch2/catch.hpp>
#include <fmt/format.h>
#include <hdf5.h>
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <thread>

namespace fs = std::filesystem;
namespace o = covergrid::output;
using covergrid::test::ScratchDir;

namespace {

// One chunk per n row (2048 p points), so a run has 80 chunks to be killed among.
// The grid is an invented test scenario: no number here is a reference value.
const char* scenario_text = R"(
title = "resume and determinism"
seed = 31337
[grid]
n = { from = 1, to = 80 }
p = { from = 0.0005, to = 0.9995, count = 2048 }
levels = [0.95]
sides = ["two-sided", "upper-bound"]
[evaluate]
exact = true
replicates = 500
[[method]]
id = "wilson"
[[method]]
id = "blaker"
[output]
cube = "r.h5"
tables = ""
)";

void write_scenario(const fs::path& dir) { std::ofstream(dir / "r.toml") << scenario_text; }

/// Starts the executable; returns its pid.
pid_t spawn(const fs::path& dir, const std::vector<std::string>& args) {
  const pid_t pid = fork();
  if (pid == 0) {
    if (chdir(dir.c_str()) != 0) _exit(126);
    std::vector<char*> argv;
    argv.push_back(const_cast<char*>(COVERGRID_EXE));
    for (const auto& a : args) argv.push_back(const_cast<char*>(a.c_str()));
    argv.push_back(nullptr);
    freopen("/dev/null", "w", stdout);
    freopen((dir / "stderr.txt").c_str(), "w", stderr);
    execv(COVERGRID_EXE, argv.data());
    _exit(127);
  }
  return pid;
}

int wait_status(pid_t pid) {
  int status = 0;
  waitpid(pid, &status, 0);
  return WIFEXITED(status) ? WEXITSTATUS(status) : 128 + WTERMSIG(status);
}

int run(const fs::path& dir, const std::vector<std::string>& args) { return wait_status(spawn(dir, args)); }

/// Waits (up to a minute) until `file` exists and holds more than `bytes`:
/// the run is then part-way through its chunks.
void wait_for_bytes(const fs::path& file, std::uintmax_t bytes) {
  const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(60);
  while (std::chrono::steady_clock::now() < deadline) {
    std::error_code ec;
    const auto size = fs::file_size(file, ec);
    if (!ec && size > bytes) return;
    std::this_thread::sleep_for(std::chrono::milliseconds(5));
  }
}

/// Every dataset path in a file.
std::vector<std::string> datasets(hid_t file) {
  std::vector<std::string> out;
  H5Lvisit(
      file, H5_INDEX_NAME, H5_ITER_INC,
      [](hid_t g, const char* name, const H5L_info_t*, void* data) -> herr_t {
        H5O_info_t info;
        if (H5Oget_info_by_name2(g, name, &info, H5O_INFO_BASIC, H5P_DEFAULT) >= 0 &&
            info.type == H5O_TYPE_DATASET)
          static_cast<std::vector<std::string>*>(data)->push_back(name);
        return 0;
      },
      &out);
  return out;
}

/// The raw bytes of a numeric dataset, or its strings joined.
std::string contents(hid_t file, const std::string& name) {
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
void same_datasets(const std::string& a, const std::string& b) {
  o::File fa = o::File::open(a, false), fb = o::File::open(b, false);
  const auto names = datasets(fa.id());
  CHECK(names == datasets(fb.id()));
  CHECK(names.size() > 30);
  for (const auto& name : names) {
    INFO(name);
    CHECK(contents(fa.id(), name) == contents(fb.id(), name));
  }
}

}  // namespace

TEST_CASE("1 and 2 threads give byte-identical datasets; a SIGKILLed run resumes to the same cube",
          "[cli][e2e][mc][resume][slow]") {
  ScratchDir one("threads-1"), two("threads-2"), killed("killed");
  for (const auto* d : {&one, &two, &killed}) write_scenario(d->path());
  REQUIRE(run(one.path(), {"run", "r.toml", "--threads", "1", "--quiet"}) == 0);
  REQUIRE(run(two.path(), {"run", "r.toml", "--threads", "2", "--quiet"}) == 0);
  same_datasets(one.file("r.h5"), two.file("r.h5"));

  // Kill mid-way: wait until the journal holds some records, then SIGKILL.
  const pid_t pid = spawn(killed.path(), {"run", "r.toml", "--threads", "2", "--quiet"});
  const fs::path journal = killed.path() / "r.h5.journal";
  wait_for_bytes(journal, 20'000'000);
  kill(pid, SIGKILL);
  CHECK(wait_status(pid) == 128 + SIGKILL);
  REQUIRE(fs::exists(journal));
  CHECK_FALSE(fs::exists(killed.path() / "r.h5"));
  // Resume and finish.
  REQUIRE(run(killed.path(), {"run", "r.toml", "--quiet"}) == 0);
  CHECK_FALSE(fs::exists(journal));
  same_datasets(one.file("r.h5"), killed.file("r.h5"));
}

TEST_CASE("SIGINT stops at a chunk boundary and the run resumes", "[cli][e2e][resume][slow]") {
  ScratchDir dir("sigint");
  write_scenario(dir.path());
  const pid_t pid = spawn(dir.path(), {"run", "r.toml", "--threads", "2"});
  const fs::path journal = dir.path() / "r.h5.journal";
  wait_for_bytes(journal, 10'000'000);
  kill(pid, SIGINT);
  const int status = wait_status(pid);
  std::ifstream err(dir.path() / "stderr.txt");
  const std::string text((std::istreambuf_iterator<char>(err)), {});
  INFO(text);
  CHECK(status == 1);
  CHECK(text.find("stopped;") != std::string::npos);
  CHECK(text.find("run the same command to resume") != std::string::npos);
  CHECK(fs::exists(journal));
  CHECK(run(dir.path(), {"run", "r.toml", "--quiet"}) == 0);
  CHECK(fs::exists(dir.path() / "r.h5"));
}
