// The MPI front end (see mpi_run.hpp): MPI as the engine's Transport
// (engine/include/covergrid/engine/dealing.hpp, where the dealing protocol
// and both sides of it live), the session, and the broadcast of the scenario.
// Only the main thread of each rank calls MPI (MPI_THREAD_FUNNELED).
//
// Messages (all MPI_BYTE, tag = kind): the engine's dealing tags 1..6, and
//   0 -> all at the end: bye (int32 exit status), tag 7.
#include "mpi_run.hpp"

#include "covergrid/cli/cli.hpp"
#include "covergrid/engine/dealing.hpp"
#include "covergrid/engine/error.hpp"
#include "covergrid/scenarios/loader.hpp"

#include <fmt/format.h>
#include <mpi.h>

#include <chrono>
#include <cstdint>
#include <cstdlib>
#include <cstring>
#include <exception>
#include <filesystem>
#include <limits>
#include <optional>
#include <stdexcept>
#include <string>
#include <thread>

namespace covergrid::cli::mpi {

namespace {

constexpr int tag_bye = 7;  // after the engine's dealing tags 1..6

constexpr int announce_go = -1;
bool mpi_on = false;
bool announced = false;
int world_rank = 0, world_size = 1;

void check(int code, const char* what) {
  if (code != MPI_SUCCESS) throw std::runtime_error(std::string("MPI call failed: ") + what);
}

/// MPI_COMM_WORLD as the engine's message layer.
class MpiTransport final : public engine::Transport {
 public:
  int peers() const override { return world_size; }
  void send(int to, int tag, const std::string& bytes) override {
    if (bytes.size() > static_cast<std::size_t>(std::numeric_limits<int>::max()))
      throw std::runtime_error("a chunk's results exceed one MPI message (2 GiB)");
    check(MPI_Send(bytes.data(), static_cast<int>(bytes.size()), MPI_BYTE, to, tag, MPI_COMM_WORLD),
          "MPI_Send");
  }
  std::optional<engine::Envelope> poll(int from) override {
    int flag = 0;
    MPI_Status status;
    check(MPI_Iprobe(from < 0 ? MPI_ANY_SOURCE : from, MPI_ANY_TAG, MPI_COMM_WORLD, &flag, &status),
          "MPI_Iprobe");
    if (!flag) return std::nullopt;
    int count = 0;
    check(MPI_Get_count(&status, MPI_BYTE, &count), "MPI_Get_count");
    engine::Envelope m;
    m.source = status.MPI_SOURCE;
    m.tag = status.MPI_TAG;
    m.bytes.resize(static_cast<std::size_t>(count));
    check(MPI_Recv(m.bytes.data(), count, MPI_BYTE, status.MPI_SOURCE, status.MPI_TAG, MPI_COMM_WORLD,
                   MPI_STATUS_IGNORE),
          "MPI_Recv");
    return m;
  }
};

void broadcast(std::string& text) {
  auto size = static_cast<std::uint64_t>(text.size());
  check(MPI_Bcast(&size, 1, MPI_UINT64_T, 0, MPI_COMM_WORLD), "MPI_Bcast");
  text.resize(size);
  if (size > static_cast<std::uint64_t>(std::numeric_limits<int>::max()))
    throw std::runtime_error("the scenario text is too large to broadcast");
  check(MPI_Bcast(text.data(), static_cast<int>(size), MPI_CHAR, 0, MPI_COMM_WORLD), "MPI_Bcast");
}

/// Test hook (DEVELOPERS.md): COVERGRID_MPI_FAIL_AFTER=K makes every rank > 0
/// fail after computing K chunks, to test a failing rank end to end.
std::optional<std::size_t> fail_after() {
  const char* v = std::getenv("COVERGRID_MPI_FAIL_AFTER");
  if (!v || !*v) return std::nullopt;
  return static_cast<std::size_t>(std::strtoull(v, nullptr, 10));
}

bool launched_by_mpi() {
  for (const char* name : {"OMPI_COMM_WORLD_SIZE", "PMIX_RANK", "PMI_RANK", "PMI_SIZE"})
    if (std::getenv(name)) return true;
  return false;
}

}  // namespace

Session::Session(int* argc, char*** argv) {
  if (!launched_by_mpi()) return;
  int provided = 0;
  if (MPI_Init_thread(argc, argv, MPI_THREAD_FUNNELED, &provided) != MPI_SUCCESS) {
    std::fputs("covergrid: cannot initialise MPI\n", stderr);
    std::exit(exit_internal);
  }
  mpi_on = true;
  MPI_Comm_rank(MPI_COMM_WORLD, &world_rank);
  MPI_Comm_size(MPI_COMM_WORLD, &world_size);
}

Session::~Session() {
  if (mpi_on) finish(exit_internal);
}

int Session::finish(int status) {
  if (!mpi_on) return status;
  mpi_on = false;
  if (world_size > 1) {
    if (world_rank == 0) {
      const auto s = static_cast<std::int32_t>(status);
      const std::string bytes(reinterpret_cast<const char*>(&s), sizeof s);
      MpiTransport transport;
      for (int r = 1; r < world_size; ++r) transport.send(r, tag_bye, bytes);
    } else {
      // Wait for rank 0 without spinning in MPI; drop anything else left.
      MpiTransport transport;
      for (;;) {
        if (auto m = transport.poll(0)) {
          if (m->tag == tag_bye) {
            std::int32_t s = exit_internal;
            if (m->bytes.size() >= sizeof s) std::memcpy(&s, m->bytes.data(), sizeof s);
            if (status == exit_ok) status = s;
            break;
          }
          continue;
        }
        std::this_thread::sleep_for(std::chrono::milliseconds(5));
      }
    }
  }
  MPI_Finalize();
  return status;
}

bool active() { return mpi_on && world_size > 1; }
int rank() { return world_rank; }
int size() { return world_size; }

void release_ranks(int status) {
  if (!active() || world_rank != 0 || announced) return;
  announced = true;
  int s = status;
  check(MPI_Bcast(&s, 1, MPI_INT, 0, MPI_COMM_WORLD), "MPI_Bcast");
}

int serve(int threads) {
  int announcement = 0;
  check(MPI_Bcast(&announcement, 1, MPI_INT, 0, MPI_COMM_WORLD), "MPI_Bcast");
  if (announcement != announce_go) return announcement;
  std::string text, name;
  broadcast(text);
  broadcast(name);

  std::optional<engine::Scenario> scenario;
  std::optional<engine::Plan> plan;
  std::string failure;
  try {
    // Files the scenario names (a table method's) resolve as on rank 0:
    // against the scenario file's folder (the ranks share the working folder).
    scenario =
        scenarios::load_scenario_text(text, name, std::filesystem::path(name).parent_path().string(), false);
    plan = engine::make_plan(*scenario);
  } catch (const std::exception& e) {
    failure = e.what();
  }

  const auto fail_at = fail_after();
  std::size_t computed = 0;
  MpiTransport transport;
  const std::string failed = engine::serve_chunks(
      scenario ? &*scenario : nullptr, plan ? &*plan : nullptr, threads, transport,
      [](const engine::ChunkResult& r) { return output::encode_chunk(r); }, failure,
      [&] {
        if (fail_at && ++computed > *fail_at)
          throw std::runtime_error(
              fmt::format("injected failure after {} chunks (COVERGRID_MPI_FAIL_AFTER)", *fail_at));
      });
  return failed.empty() ? exit_ok : exit_internal;
}

engine::RunReport run_ranks(const engine::Scenario& scenario, const engine::Plan& plan,
                            output::CubeWriter& writer, const engine::RunOptions& options) {
  // The announcement, then the scenario (the others read no file).
  {
    int go = announce_go;
    announced = true;
    check(MPI_Bcast(&go, 1, MPI_INT, 0, MPI_COMM_WORLD), "MPI_Bcast");
    std::string text = scenario.source_text, name = scenario.source_name;
    broadcast(text);
    broadcast(name);
  }
  MpiTransport transport;
  const engine::DealtSink out{
      &writer, [&](std::size_t id, const std::string& bytes) { writer.write_encoded(id, bytes); }};
  return engine::deal_chunks(scenario, plan, out, options, transport);
}

}  // namespace covergrid::cli::mpi
