// A full disk and a damaged journal, end to end with the executable: a run
// whose journal or cube cannot be written for want of space ends with exit 2
// naming the file (no crash, no .partial, the journal kept), and the same
// command resumes once space is back; a journal with a torn, flipped or
// oversized record resumes to the byte-identical cube of an uninterrupted
// run, saying what it dropped; a damaged journal header is called damaged.
//
// Want of space is made for real: the child runs under a file-size limit
// (`ulimit -f`, RLIMIT_FSIZE, with SIGXFSZ ignored), so the kernel refuses
// the write past the limit with EFBIG; /dev/full refuses every write with
// ENOSPC (both Linux, "common practice").
#include "cli_call.hpp"
#include "e2e.hpp"
#include "support.hpp"

#include <catch2/catch.hpp>
#include <fmt/format.h>

#include <cstdint>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <string>
#include <vector>

namespace fs = std::filesystem;
using namespace covergrid::test;

namespace {

// Invented test scenarios (no number here is a reference value). `small`
// is one chunk with Monte Carlo: its journal (about 67 kB) is smaller than
// its cube (about 380 kB: HDF5 metadata, axes, attributes). `rows` is 16
// chunks of one n row each (about 115 kB of journal per chunk).
const char* small_text = R"(
title = "full disk"
seed = 4242
[grid]
n = { from = 1, to = 20 }
p = { from = 0.01, to = 0.99, count = 12 }
levels = [0.9]
sides = ["two-sided"]
[evaluate]
exact = true
replicates = 50
[[method]]
id = "wilson"
[[method]]
id = "clopper-pearson"
[output]
cube = "r.h5"
tables = ""
)";
const char* rows_text = R"(
title = "damaged journal"
[grid]
n = { from = 1, to = 16 }
p = { from = 0.0005, to = 0.9995, count = 2048 }
levels = [0.9]
sides = ["two-sided"]
[evaluate]
exact = true
replicates = 0
[[method]]
id = "wilson"
[output]
cube = "r.h5"
tables = ""
)";

void write_scenario(const fs::path& dir, const char* text = small_text) {
  std::ofstream(dir / "r.toml") << text;
}

int run_program(const fs::path& dir, const std::vector<std::string>& args, const std::string& program) {
  return wait_status(spawn(dir, args, program));
}

/// `covergrid ARGS` in `dir` under a file-size limit of `kib` KiB (SIGXFSZ
/// ignored, so an over-limit write fails with EFBIG instead of killing).
int run_limited(const fs::path& dir, std::size_t kib, const std::string& args) {
  const std::string script =
      fmt::format("trap '' XFSZ; ulimit -f {}; exec '{}' {}", kib * 2, COVERGRID_EXE, args);  // dash: 512 B
  return run_program(dir, {"-c", script}, "/bin/sh");
}

std::string stderr_of(const fs::path& dir) { return slurp(dir / "stderr.txt"); }

/// The byte offsets of the journal's complete records, and the end of the
/// last (header 112 bytes; a record of 32: mark, reserved, chunk id, size at +16,
/// checksum, then the payload).
std::vector<std::uint64_t> record_offsets(const std::string& bytes, std::uint64_t& end) {
  std::vector<std::uint64_t> out;
  end = 112;
  for (std::uint64_t at = 112; at + 32 <= bytes.size();) {
    std::uint64_t size;
    std::memcpy(&size, bytes.data() + at + 16, 8);
    if (at + 32 + size > bytes.size()) break;
    out.push_back(at);
    at += 32 + size;
    end = at;
  }
  return out;
}

std::string read_bytes(const fs::path& p) {
  std::ifstream in(p, std::ios::binary);
  return std::string(std::istreambuf_iterator<char>(in), {});
}
void write_bytes(const fs::path& p, const std::string& bytes) {
  std::ofstream(p, std::ios::binary | std::ios::trunc) << bytes;
}

}  // namespace

TEST_CASE("a full disk while the cube is assembled: exit 2, no .partial, the journal resumes",
          "[cli][e2e][resume][disk]") {
  ScratchDir single("full-single"), full("full-cube");
  write_scenario(single.path());
  write_scenario(full.path());
  REQUIRE(run(single.path(), {"run", "r.toml", "--quiet"}) == 0);
  const auto cube_size = fs::file_size(single.path() / "r.h5");

  // A limit the journal fits under but the cube does not.
  const std::size_t limit_kib = 200;
  REQUIRE(cube_size > limit_kib * 1024);
  const int status = run_limited(full.path(), limit_kib, "run r.toml --quiet");
  const std::string text = stderr_of(full.path());
  INFO(text);
  CHECK(status == 2);  // was 139: SIGSEGV in H5F__close_cb at exit
  CHECK(text.find("r.h5.partial: cannot write the cube: No space left on device") != std::string::npos);
  CHECK(text.find("1 of 1 chunks are saved in ") != std::string::npos);
  CHECK(text.find("internal error") == std::string::npos);
  CHECK_FALSE(fs::exists(full.path() / "r.h5.partial"));
  CHECK_FALSE(fs::exists(full.path() / "r.h5"));
  REQUIRE(fs::exists(full.path() / "r.h5.journal"));
  CHECK(fs::file_size(full.path() / "r.h5.journal") < limit_kib * 1024);

  // Space back: the same command assembles the cube from the journal.
  REQUIRE(run(full.path(), {"run", "r.toml"}) == 0);
  CHECK(stderr_of(full.path()).find("resuming the unfinished run") != std::string::npos);
  CHECK_FALSE(fs::exists(full.path() / "r.h5.journal"));
  same_datasets(single.file("r.h5"), full.file("r.h5"));
}

TEST_CASE("a full disk for the journal: exit 2 naming it, and the run resumes", "[cli][e2e][resume][disk]") {
  ScratchDir single("journal-full-single"), full("journal-full");
  write_scenario(single.path(), rows_text);
  write_scenario(full.path(), rows_text);
  REQUIRE(run(single.path(), {"run", "r.toml", "--quiet"}) == 0);
  // 1 MiB: some of the 16 records fit, then the kernel refuses (EFBIG).
  const int status = run_limited(full.path(), 1024, "run r.toml --quiet");
  const std::string text = stderr_of(full.path());
  INFO(text);
  CHECK(status == 2);  // was 1, "internal error"
  CHECK(text.find("r.h5.journal: cannot write: No space left on device") != std::string::npos);
  CHECK(text.find("of 16 chunks are saved in ") != std::string::npos);
  CHECK(text.find("free space and run the same command to resume") != std::string::npos);
  CHECK_FALSE(fs::exists(full.path() / "r.h5.partial"));
  REQUIRE(fs::exists(full.path() / "r.h5.journal"));
  // The record cut off by the limit is torn; the resume drops it, says so,
  // and ends with the uninterrupted run's cube.
  REQUIRE(run(full.path(), {"run", "r.toml", "--quiet"}) == 0);
  const std::string resumed = stderr_of(full.path());
  INFO(resumed);
  CHECK(resumed.find("r.h5.journal: dropped 1 damaged record (1 chunk to compute again)") !=
        std::string::npos);
  CHECK(resumed.find("(torn)") != std::string::npos);
  same_datasets(single.file("r.h5"), full.file("r.h5"));
}

TEST_CASE("a journal on a device that is full (ENOSPC) is exit 2 naming it", "[cli][e2e][disk]") {
  ScratchDir dir("dev-full");
  write_scenario(dir.path());
  fs::create_symlink("/dev/full", dir.path() / "r.h5.journal");
  const auto r = call({"run", dir.file("r.toml"), "--quiet", "--overwrite"});
  INFO(r.err);
  CHECK(r.status == 2);
  CHECK(r.err.find("r.h5.journal: cannot write: No space left on device") != std::string::npos);
  CHECK_FALSE(fs::exists(dir.path() / "r.h5"));
}

TEST_CASE("a damaged journal resumes to the uninterrupted cube and says what it dropped",
          "[cli][e2e][resume][journal]") {
  ScratchDir single("damage-single"), source("damage-source");
  write_scenario(single.path(), rows_text);
  write_scenario(source.path(), rows_text);
  REQUIRE(run(single.path(), {"run", "r.toml", "--quiet"}) == 0);
  // An unfinished run's journal: the run stopped when its file could not grow.
  REQUIRE(run_limited(source.path(), 1024, "run r.toml --quiet") == 2);
  const std::string whole = read_bytes(source.path() / "r.h5.journal");
  std::uint64_t end = 0;
  const auto records = record_offsets(whole, end);
  REQUIRE(records.size() >= 4);
  const std::string journal = whole.substr(0, end);  // without the torn record
  const std::uint64_t middle = records[2];
  const std::string kept = fmt::format("; {} chunks kept", records.size() - 1);

  struct Variant {
    const char* name;
    std::string bytes;
    const char* said;
  };
  std::vector<Variant> variants;
  {
    std::string b = journal;  // the size field with bit 35 set: was std::bad_alloc on every rerun
    b[middle + 16 + 4] = static_cast<char>(b[middle + 16 + 4] | 0x08);
    variants.push_back({"size bit 35", b, "with only"});
  }
  {
    std::string b = journal;  // one byte flipped inside a payload: was silently dropping the rest
    b[middle + 32 + 100] = static_cast<char>(b[middle + 32 + 100] ^ 0x01);
    variants.push_back({"payload flip", b, "fails its checksum"});
  }
  {
    std::string b = journal;  // the chunk id changed: the checksum covers it
    b[middle + 8] = static_cast<char>(b[middle + 8] ^ 0x01);
    variants.push_back({"id flip", b, "fails its checksum"});
  }
  {
    std::string b = journal;  // a record mark destroyed
    b[middle] = 'X';
    variants.push_back({"mark", b, "no record mark"});
  }
  variants.push_back({"torn tail", journal + whole.substr(end, 50), "(torn)"});

  for (const auto& v : variants) {
    DYNAMIC_SECTION(v.name) {
      ScratchDir dir("damage");
      write_scenario(dir.path(), rows_text);
      write_bytes(dir.path() / "r.h5.journal", v.bytes);
      const int status = run(dir.path(), {"run", "r.toml", "--quiet"});
      const std::string text = stderr_of(dir.path());
      INFO(text);
      REQUIRE(status == 0);
      CHECK(text.find("r.h5.journal: dropped 1 damaged record (1 chunk to compute again)") !=
            std::string::npos);
      CHECK(text.find(v.said) != std::string::npos);
      CHECK(text.find(std::string(v.name) == "torn tail" ? fmt::format("; {} chunks kept", records.size())
                                                         : kept) != std::string::npos);
      same_datasets(single.file("r.h5"), dir.file("r.h5"));
    }
  }
}

TEST_CASE("a damaged journal header is called damaged, and --overwrite starts again",
          "[cli][e2e][resume][journal]") {
  ScratchDir single("header-single"), dir("header");
  write_scenario(single.path());
  write_scenario(dir.path());
  REQUIRE(run(single.path(), {"run", "r.toml", "--quiet"}) == 0);
  REQUIRE(run_limited(dir.path(), 200, "run r.toml --quiet") == 2);
  std::string b = read_bytes(dir.path() / "r.h5.journal");
  b[20] = b[20] == 'a' ? 'b' : 'a';  // one hex digit of the scenario checksum
  write_bytes(dir.path() / "r.h5.journal", b);
  const auto r = call({"run", dir.file("r.toml"), "--quiet"});
  INFO(r.err);
  CHECK(r.status == 2);
  CHECK(r.err.find("r.h5.journal: is a damaged journal: its header fails its checksum") != std::string::npos);
  CHECK(r.err.find("use --overwrite to start the run again") != std::string::npos);
  CHECK(r.err.find("different scenario") == std::string::npos);
  CHECK(fs::exists(dir.path() / "r.h5.journal"));  // untouched
  CHECK(read_bytes(dir.path() / "r.h5.journal") == b);
  REQUIRE(run(dir.path(), {"run", "r.toml", "--quiet", "--overwrite"}) == 0);
  same_datasets(single.file("r.h5"), dir.file("r.h5"));
}

TEST_CASE("a journal left empty by a full disk is started again, not a dead end",
          "[cli][e2e][resume][disk]") {
  // Was: the rerun refused it ("not a covergrid journal; use --overwrite").
  ScratchDir single("stub-single"), dir("stub");
  write_scenario(single.path());
  write_scenario(dir.path());
  REQUIRE(run(single.path(), {"run", "r.toml", "--quiet"}) == 0);
  // No byte can be written: the journal is created, its header is not.
  CHECK(run_limited(dir.path(), 0, "run r.toml --quiet") == 2);
  REQUIRE(fs::exists(dir.path() / "r.h5.journal"));
  REQUIRE(fs::file_size(dir.path() / "r.h5.journal") == 0);
  const int status = run(dir.path(), {"run", "r.toml", "--quiet"});
  INFO(stderr_of(dir.path()));
  REQUIRE(status == 0);
  same_datasets(single.file("r.h5"), dir.file("r.h5"));
  // A header cut short the same way (the journal mark, then nothing).
  ScratchDir cut("stub-cut");
  write_scenario(cut.path());
  write_bytes(cut.path() / "r.h5.journal", std::string("CGJOUR"));
  REQUIRE(run(cut.path(), {"run", "r.toml", "--quiet"}) == 0);
  same_datasets(single.file("r.h5"), cut.file("r.h5"));
}

TEST_CASE("garbage appended to a journal costs no chunk and is counted so", "[cli][e2e][resume][journal]") {
  // Was: "1 chunk to compute again" although every chunk was kept.
  ScratchDir single("garbage-single"), source("garbage-source"), dir("garbage");
  write_scenario(single.path(), rows_text);
  write_scenario(source.path(), rows_text);
  write_scenario(dir.path(), rows_text);
  REQUIRE(run(single.path(), {"run", "r.toml", "--quiet"}) == 0);
  REQUIRE(run_limited(source.path(), 1024, "run r.toml --quiet") == 2);
  const std::string whole = read_bytes(source.path() / "r.h5.journal");
  std::uint64_t end = 0;
  const auto records = record_offsets(whole, end);
  write_bytes(dir.path() / "r.h5.journal", whole.substr(0, end) + std::string(300, 'g'));
  REQUIRE(run(dir.path(), {"run", "r.toml", "--quiet"}) == 0);
  const std::string text = stderr_of(dir.path());
  INFO(text);
  CHECK(text.find("dropped 1 damaged record (0 chunks to compute again)") != std::string::npos);
  CHECK(text.find(fmt::format("; {} chunks kept", records.size())) != std::string::npos);
  same_datasets(single.file("r.h5"), dir.file("r.h5"));
}
