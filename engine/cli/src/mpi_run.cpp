// The MPI front end (see mpi_run.hpp). Only the main thread of each rank
// calls MPI (MPI_THREAD_FUNNELED); the chunks are computed by
// engine::compute_feed on a second thread, with oneTBB inside. The main
// thread never blocks in MPI: it probes, and sleeps on its mailbox between
// probes, so it leaves the cores to the computation.
//
// Messages (all MPI_BYTE, tag = kind):
//   worker -> 0: request (uint32 how many more chunks), result (uint64 chunk
//                id, then the encoded chunk), failed (text), done (empty;
//                the worker's last message)
//   0 -> worker: assign (uint64 chunk id), stop (no more chunks)
//   0 -> all at the end: bye (int32 exit status)
#include "mpi_run.hpp"

#include "covergrid/cli/cli.hpp"
#include "covergrid/engine/error.hpp"
#include "covergrid/scenarios/loader.hpp"

#include <fmt/format.h>
#include <mpi.h>

#include <filesystem>
#include <chrono>
#include <condition_variable>
#include <cstdint>
#include <cstdlib>
#include <cstring>
#include <deque>
#include <exception>
#include <functional>
#include <limits>
#include <mutex>
#include <optional>
#include <stdexcept>
#include <string>
#include <thread>
#include <vector>

namespace covergrid::cli::mpi {

namespace {

enum Tag : int { tag_request = 1, tag_assign, tag_stop, tag_result, tag_failed, tag_done, tag_bye };

constexpr int announce_go = -1;
bool mpi_on = false;
bool announced = false;
int world_rank = 0, world_size = 1;

void check(int code, const char* what) {
  if (code != MPI_SUCCESS) throw std::runtime_error(std::string("MPI call failed: ") + what);
}

void send(int dest, Tag tag, const std::string& bytes) {
  if (bytes.size() > static_cast<std::size_t>(std::numeric_limits<int>::max()))
    throw std::runtime_error("a chunk's results exceed one MPI message (2 GiB)");
  check(MPI_Send(bytes.data(), static_cast<int>(bytes.size()), MPI_BYTE, dest, tag, MPI_COMM_WORLD),
        "MPI_Send");
}

template <class T>
std::string bytes_of(const T& v) {
  return std::string(reinterpret_cast<const char*>(&v), sizeof v);
}

template <class T>
T value_of(const std::string& bytes) {
  T v{};
  if (bytes.size() < sizeof v) throw std::runtime_error("short MPI message");
  std::memcpy(&v, bytes.data(), sizeof v);
  return v;
}

struct Message {
  int source = 0;
  Tag tag = tag_done;
  std::string bytes;
};

/// The next pending message, if any (never blocks).
std::optional<Message> poll(int source = MPI_ANY_SOURCE) {
  int flag = 0;
  MPI_Status status;
  check(MPI_Iprobe(source, MPI_ANY_TAG, MPI_COMM_WORLD, &flag, &status), "MPI_Iprobe");
  if (!flag) return std::nullopt;
  int count = 0;
  check(MPI_Get_count(&status, MPI_BYTE, &count), "MPI_Get_count");
  Message m;
  m.source = status.MPI_SOURCE;
  m.tag = static_cast<Tag>(status.MPI_TAG);
  m.bytes.resize(static_cast<std::size_t>(count));
  check(MPI_Recv(m.bytes.data(), count, MPI_BYTE, status.MPI_SOURCE, status.MPI_TAG, MPI_COMM_WORLD,
                 MPI_STATUS_IGNORE),
        "MPI_Recv");
  return m;
}

void broadcast(std::string& text) {
  auto size = static_cast<std::uint64_t>(text.size());
  check(MPI_Bcast(&size, 1, MPI_UINT64_T, 0, MPI_COMM_WORLD), "MPI_Bcast");
  text.resize(size);
  if (size > static_cast<std::uint64_t>(std::numeric_limits<int>::max()))
    throw std::runtime_error("the scenario text is too large to broadcast");
  check(MPI_Bcast(text.data(), static_cast<int>(size), MPI_CHAR, 0, MPI_COMM_WORLD), "MPI_Bcast");
}

/// A queue between the computing thread and the main thread.
template <class T>
class Mailbox {
 public:
  void push(T v) {
    {
      std::lock_guard lock(mutex_);
      items_.push_back(std::move(v));
    }
    ready_.notify_all();
  }
  /// Waits until an item is there (nullopt once closed and empty).
  std::optional<T> pop_wait() {
    std::unique_lock lock(mutex_);
    ready_.wait(lock, [&] { return !items_.empty() || closed_; });
    return take(lock);
  }
  std::optional<T> try_pop() {
    std::unique_lock lock(mutex_);
    return take(lock);
  }
  /// Sleeps up to `ms` or until an item or a close arrives.
  void wait_for(int ms) {
    std::unique_lock lock(mutex_);
    ready_.wait_for(lock, std::chrono::milliseconds(ms), [&] { return !items_.empty() || closed_; });
  }
  void close() {
    {
      std::lock_guard lock(mutex_);
      closed_ = true;
    }
    ready_.notify_all();
  }
  bool closed() {
    std::lock_guard lock(mutex_);
    return closed_;
  }
  bool empty() {
    std::lock_guard lock(mutex_);
    return items_.empty();
  }

 private:
  std::optional<T> take(std::unique_lock<std::mutex>&) {
    if (items_.empty()) return std::nullopt;
    T v = std::move(items_.front());
    items_.pop_front();
    return v;
  }
  std::mutex mutex_;
  std::condition_variable ready_;
  std::deque<T> items_;
  bool closed_ = false;
};

/// The chunks still to deal, in plan order, shared by rank 0's main thread
/// (for the other ranks) and its own computing thread.
class Dealer {
 public:
  explicit Dealer(std::vector<std::size_t> ids) : ids_(std::move(ids)) {}
  std::optional<std::size_t> take() {
    std::lock_guard lock(mutex_);
    if (stopped_ || next_ == ids_.size()) return std::nullopt;
    return ids_[next_++];
  }
  void stop() {
    std::lock_guard lock(mutex_);
    stopped_ = true;
  }

 private:
  std::mutex mutex_;
  std::vector<std::size_t> ids_;
  std::size_t next_ = 0;
  bool stopped_ = false;
};

/// Runs compute_feed on its own thread; results and the end (or an error)
/// arrive in a mailbox.
class Computer {
 public:
  struct Feed : engine::ChunkFeed {
    std::function<std::optional<std::size_t>()> source;
    std::function<void(engine::ChunkResult&&)> sink;
    std::optional<std::size_t> next() override { return source(); }
    void done(engine::ChunkResult&& r) override { sink(std::move(r)); }
  };

  Computer(const engine::Scenario& s, const engine::Plan& plan, int threads,
           std::function<std::optional<std::size_t>()> source, std::function<void()> on_result = {}) {
    feed_.source = std::move(source);
    feed_.sink = [this, on_result](engine::ChunkResult&& r) {
      if (on_result) on_result();
      results.push(std::move(r));
    };
    thread_ = std::thread([this, &s, &plan, threads] {
      try {
        engine::compute_feed(s, plan, feed_, threads);
      } catch (const std::exception& e) {
        std::lock_guard lock(mutex_);
        error_ = e.what();
      } catch (...) {
        std::lock_guard lock(mutex_);
        error_ = "unknown exception";
      }
      results.close();  // wakes the main thread; results already in stay readable
    });
  }
  ~Computer() { join(); }
  void join() {
    if (thread_.joinable()) thread_.join();
  }
  /// The computing thread has ended.
  bool ended() { return results.closed(); }
  /// Its error, once ended (empty if none).
  std::string error() {
    std::lock_guard lock(mutex_);
    return error_;
  }

  Mailbox<engine::ChunkResult> results;

 private:
  Feed feed_;
  std::thread thread_;
  std::mutex mutex_;
  std::string error_;
};

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
      for (int r = 1; r < world_size; ++r) send(r, tag_bye, bytes_of(s));
    } else {
      // Wait for rank 0 without spinning in MPI; drop anything else left.
      for (;;) {
        if (auto m = poll(0)) {
          if (m->tag == tag_bye) {
            const auto s = value_of<std::int32_t>(m->bytes);
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

  const std::size_t slots = static_cast<std::size_t>(threads > 0 ? threads : 1) * 2 + 2;
  const auto fail_at = fail_after();
  Mailbox<std::size_t> assigned;
  std::size_t computed = 0;
  std::optional<Computer> computer;
  if (failure.empty())
    computer.emplace(
        *scenario, *plan, threads, [&] { return assigned.pop_wait(); },
        [&] {
          if (fail_at && ++computed > *fail_at)
            throw std::runtime_error(
                fmt::format("injected failure after {} chunks (COVERGRID_MPI_FAIL_AFTER)", *fail_at));
        });

  bool stopped = false, failure_sent = false;
  std::size_t pending = 0;      // chunks asked for, not yet assigned
  std::size_t outstanding = 0;  // chunks assigned, results not yet sent
  for (;;) {
    if (computer && computer->ended() && failure.empty()) failure = computer->error();
    if (!failure.empty() && !failure_sent) {
      send(0, tag_failed, failure);
      failure_sent = true;
      assigned.close();
    }
    if (!stopped && !failure_sent && outstanding + pending < slots) {
      const auto want = static_cast<std::uint32_t>(slots - outstanding - pending);
      send(0, tag_request, bytes_of(want));
      pending += want;
    }
    while (auto m = poll(0)) {
      if (m->tag == tag_assign) {
        assigned.push(static_cast<std::size_t>(value_of<std::uint64_t>(m->bytes)));
        --pending;
        ++outstanding;
      } else if (m->tag == tag_stop) {
        stopped = true;
        pending = 0;
        assigned.close();
      }
    }
    if (computer && !failure_sent)
      while (auto r = computer->results.try_pop()) {
        send(0, tag_result, bytes_of(static_cast<std::uint64_t>(r->spec.id)) + output::encode_chunk(*r));
        --outstanding;
      }
    const bool computing = computer && !computer->ended();
    // Done when told to stop and everything computed is sent, or after a
    // failure (its report is the last message; rank 0 sends it no stop).
    if (failure_sent && !computing) break;
    if (stopped && !computing && (!computer || computer->results.empty())) break;
    if (computer)
      computer->results.wait_for(1);
    else
      std::this_thread::sleep_for(std::chrono::milliseconds(1));
  }
  if (computer) computer->join();
  if (!failure_sent) send(0, tag_done, {});
  return failure.empty() ? exit_ok : exit_internal;
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
  engine::RunReport report;
  const std::vector<char> done = writer.completed();
  std::vector<char> selected(plan.chunks.size(), options.only_chunks ? 0 : 1);
  if (options.only_chunks)
    for (std::size_t id : *options.only_chunks) selected.at(id) = 1;
  std::vector<std::size_t> todo;
  std::size_t cells_done = 0, cells_total = 0;
  for (const auto& c : plan.chunks) {
    if (!selected[c.id]) continue;
    ++report.chunks_total;
    cells_total += c.n_count * c.p_count;
    if (done[c.id]) {
      ++report.chunks_resumed;
      cells_done += c.n_count * c.p_count;
    } else {
      todo.push_back(c.id);
    }
  }

  Dealer dealer(todo);
  Computer local(scenario, plan, options.threads, [&] { return dealer.take(); });
  std::vector<char> stop_sent(static_cast<std::size_t>(world_size), 0),
      alive(static_cast<std::size_t>(world_size), 1);
  std::size_t workers = static_cast<std::size_t>(world_size) - 1;
  bool stopping = false, writing = true;
  std::size_t since_checkpoint = 0;
  const std::size_t checkpoint_every = 32;

  auto stop_all = [&] {
    if (stopping) return;
    stopping = true;
    dealer.stop();
    for (int r = 1; r < world_size; ++r)
      if (alive[static_cast<std::size_t>(r)] && !stop_sent[static_cast<std::size_t>(r)]) {
        send(r, tag_stop, {});
        stop_sent[static_cast<std::size_t>(r)] = 1;
      }
  };
  auto fail = [&](const std::string& what) {
    if (report.failure.empty()) report.failure = what;
    stop_all();
  };
  report.chunks_by_rank.assign(static_cast<std::size_t>(world_size), 0);
  auto store = [&](const engine::ChunkSpec& c, int from, const std::function<void()>& write) {
    if (!writing) return;
    try {
      write();
    } catch (const std::exception& e) {
      writing = false;
      fail(fmt::format("rank 0 failed: {}", e.what()));
      return;
    }
    cells_done += c.n_count * c.p_count;
    ++report.chunks_computed;
    ++report.chunks_by_rank[static_cast<std::size_t>(from)];
    if (++since_checkpoint >= checkpoint_every) {
      writer.checkpoint();
      since_checkpoint = 0;
      if (options.progress) options.progress(cells_done, cells_total);
    }
  };

  bool local_reported = false;
  for (;;) {
    if (options.stop && options.stop->load() && !stopping) {
      report.interrupted = true;
      stop_all();
    }
    while (auto r = local.results.try_pop()) {
      const engine::ChunkSpec& c = plan.chunks.at(r->spec.id);
      store(c, 0, [&] { writer.write_chunk(*r); });
    }
    if (local.ended() && !local_reported) {
      local_reported = true;
      if (const std::string e = local.error(); !e.empty()) fail("rank 0 failed: " + e);
    }
    while (auto m = poll()) {
      const auto r = static_cast<std::size_t>(m->source);
      switch (m->tag) {
        case tag_request: {
          const auto want = value_of<std::uint32_t>(m->bytes);
          if (stop_sent[r]) break;
          for (std::uint32_t k = 0; k < want; ++k) {
            const auto id = dealer.take();
            if (!id) {
              send(m->source, tag_stop, {});
              stop_sent[r] = 1;
              break;
            }
            send(m->source, tag_assign, bytes_of(static_cast<std::uint64_t>(*id)));
          }
          break;
        }
        case tag_result: {
          const auto id = static_cast<std::size_t>(value_of<std::uint64_t>(m->bytes));
          const engine::ChunkSpec& c = plan.chunks.at(id);
          store(c, m->source, [&] { writer.write_encoded(id, m->bytes.substr(sizeof(std::uint64_t))); });
          break;
        }
        case tag_failed:
          alive[r] = 0;
          --workers;
          fail(fmt::format("rank {} failed: {}", r, m->bytes));
          break;
        case tag_done:
          alive[r] = 0;
          --workers;
          break;
        default:
          break;
      }
    }
    if (workers == 0 && local.ended() && local.results.empty()) break;
    local.results.wait_for(1);
  }
  local.join();
  // Results that came in after the last check (none are lost: results stay
  // readable after the computing thread ends).
  while (auto r = local.results.try_pop())
    store(plan.chunks.at(r->spec.id), 0, [&] { writer.write_chunk(*r); });
  writer.checkpoint();
  if (options.progress) options.progress(cells_done, cells_total);
  if (!report.failure.empty() || report.interrupted) return report;
  if (options.only_chunks)
    writer.finish();
  else
    engine::finish_scenario(scenario, plan, writer);
  return report;
}

}  // namespace covergrid::cli::mpi
