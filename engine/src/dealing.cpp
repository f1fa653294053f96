// Distributed runs (dealing.hpp): peer 0's dealer and the other peers'
// server, written against Transport. Only the calling thread of each peer
// uses the transport (MPI_THREAD_FUNNELED suffices); the chunks are computed
// by compute_feed on a second thread, with oneTBB inside. The calling thread
// never blocks in the transport: it polls, and sleeps on its mailbox between
// polls, so it leaves the cores to the computation.
#include "covergrid/engine/dealing.hpp"

#include "pending_chunks.hpp"

#include <fmt/format.h>

#include <chrono>
#include <condition_variable>
#include <cstdint>
#include <cstring>
#include <deque>
#include <exception>
#include <mutex>
#include <stdexcept>
#include <thread>
#include <vector>

namespace covergrid::engine {

namespace {

enum Tag : int { tag_request = 1, tag_assign, tag_stop, tag_result, tag_failed, tag_done };

template <class T>
std::string bytes_of(const T& v) {
  return std::string(reinterpret_cast<const char*>(&v), sizeof v);
}

template <class T>
T value_of(const std::string& bytes) {
  T v{};
  if (bytes.size() < sizeof v) throw std::runtime_error("short message between peers");
  std::memcpy(&v, bytes.data(), sizeof v);
  return v;
}

/// A queue between the computing thread and the calling thread.
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
    return take();
  }
  std::optional<T> try_pop() {
    std::lock_guard lock(mutex_);
    return take();
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
  std::optional<T> take() {  // the lock is held
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

/// The chunks still to deal, in plan order, shared by peer 0's calling
/// thread (for the other peers) and its own computing thread.
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
  struct Feed : ChunkFeed {
    std::function<std::optional<std::size_t>()> source;
    std::function<void(ChunkResult&&)> sink;
    std::optional<std::size_t> next() override { return source(); }
    void done(ChunkResult&& r) override { sink(std::move(r)); }
  };

  Computer(const Scenario& s, const Plan& plan, int threads,
           std::function<std::optional<std::size_t>()> source, std::function<void()> on_result = {}) {
    feed_.source = std::move(source);
    feed_.sink = [this, on_result](ChunkResult&& r) {
      if (on_result) on_result();
      results.push(std::move(r));
    };
    thread_ = std::thread([this, &s, &plan, threads] {
      try {
        compute_feed(s, plan, feed_, threads);
      } catch (const std::exception& e) {
        std::lock_guard lock(mutex_);
        error_ = e.what();
      } catch (...) {
        std::lock_guard lock(mutex_);
        error_ = "unknown exception";
      }
      results.close();  // wakes the calling thread; results already in stay readable
    });
  }
  ~Computer() { join(); }
  Computer(const Computer&) = delete;
  Computer& operator=(const Computer&) = delete;
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

  Mailbox<ChunkResult> results;

 private:
  Feed feed_;
  std::thread thread_;
  std::mutex mutex_;
  std::string error_;
};

/// Peer 0's bookkeeping: which peers still run, which were told to stop,
/// and what was stored.
class DealState {
 public:
  DealState(const Plan& plan, const DealtSink& out, const RunOptions& options, Transport& transport,
            RunReport& report, Dealer& dealer)
      : plan_(plan),
        out_(out),
        options_(options),
        transport_(transport),
        report_(report),
        dealer_(dealer),
        peers_(static_cast<std::size_t>(transport.peers())),
        stop_sent_(peers_, 0),
        alive_(peers_, 1),
        workers_(peers_ - 1) {
    report_.chunks_by_rank.assign(peers_, 0);
  }

  void stop_all() {
    if (stopping_) return;
    stopping_ = true;
    dealer_.stop();
    for (std::size_t r = 1; r < peers_; ++r)
      if (alive_[r] && !stop_sent_[r]) {
        transport_.send(static_cast<int>(r), tag_stop, {});
        stop_sent_[r] = 1;
      }
  }
  void fail(const std::string& what) {
    if (report_.failure.empty()) report_.failure = what;
    stop_all();
  }
  bool stopping() const { return stopping_; }
  std::size_t workers() const { return workers_; }

  /// Stores one chunk through `write`; a failing store stops the run.
  void store(std::size_t id, std::size_t from, const std::function<void()>& write) {
    if (!writing_) return;
    const ChunkSpec& c = plan_.chunks.at(id);
    try {
      write();
    } catch (const std::exception& e) {
      writing_ = false;
      fail(fmt::format("rank 0 failed: {}", e.what()));
      return;
    }
    cells_done += c.n_count * c.p_count;
    ++report_.chunks_computed;
    ++report_.chunks_by_rank[from];
    if (++since_checkpoint_ >= checkpoint_every) {
      out_.sink->checkpoint();
      since_checkpoint_ = 0;
      if (options_.progress) options_.progress(cells_done, cells_total);
    }
  }

  /// Handles one message from a peer.
  void handle(const Envelope& m) {
    const auto r = static_cast<std::size_t>(m.source);
    switch (m.tag) {
      case tag_request: {
        const auto want = value_of<std::uint32_t>(m.bytes);
        if (stop_sent_[r]) break;
        for (std::uint32_t k = 0; k < want; ++k) {
          const auto id = dealer_.take();
          if (!id) {
            transport_.send(m.source, tag_stop, {});
            stop_sent_[r] = 1;
            break;
          }
          transport_.send(m.source, tag_assign, bytes_of(static_cast<std::uint64_t>(*id)));
        }
        break;
      }
      case tag_result: {
        const auto id = static_cast<std::size_t>(value_of<std::uint64_t>(m.bytes));
        store(id, r, [&] { out_.write_encoded(id, m.bytes.substr(sizeof(std::uint64_t))); });
        break;
      }
      case tag_failed:
        alive_[r] = 0;
        --workers_;
        fail(fmt::format("rank {} failed: {}", r, m.bytes));
        break;
      case tag_done:
        alive_[r] = 0;
        --workers_;
        break;
      default:
        break;
    }
  }

  std::size_t cells_done = 0, cells_total = 0;

 private:
  static constexpr std::size_t checkpoint_every = 32;
  const Plan& plan_;
  const DealtSink& out_;
  const RunOptions& options_;
  Transport& transport_;
  RunReport& report_;
  Dealer& dealer_;
  std::size_t peers_;
  std::vector<char> stop_sent_, alive_;
  std::size_t workers_;
  bool stopping_ = false, writing_ = true;
  std::size_t since_checkpoint_ = 0;
};

}  // namespace

RunReport deal_chunks(const Scenario& scenario, const Plan& plan, const DealtSink& out,
                      const RunOptions& options, Transport& transport) {
  RunReport report;
  const std::vector<char> done = out.sink->completed();
  detail::PendingChunks pending = detail::pending_chunks(plan, done, options, report);

  Dealer dealer(std::move(pending.todo));
  DealState state(plan, out, options, transport, report, dealer);
  state.cells_done = pending.cells_done;
  state.cells_total = pending.cells_total;
  Computer local(scenario, plan, options.threads, [&] { return dealer.take(); });
  bool local_reported = false;
  for (;;) {
    if (options.stop && options.stop->load() && !state.stopping()) {
      report.interrupted = true;
      state.stop_all();
    }
    while (auto r = local.results.try_pop()) {
      const std::size_t id = r->spec.id;
      state.store(id, 0, [&] { out.sink->write_chunk(*r); });
    }
    if (local.ended() && !local_reported) {
      local_reported = true;
      if (const std::string e = local.error(); !e.empty()) state.fail("rank 0 failed: " + e);
    }
    while (auto m = transport.poll()) state.handle(*m);
    if (state.workers() == 0 && local.ended() && local.results.empty()) break;
    local.results.wait_for(1);
  }
  local.join();
  // Results that came in after the last check (none are lost: results stay
  // readable after the computing thread ends).
  while (auto r = local.results.try_pop()) {
    const std::size_t id = r->spec.id;
    state.store(id, 0, [&] { out.sink->write_chunk(*r); });
  }
  out.sink->checkpoint();
  if (options.progress) options.progress(state.cells_done, state.cells_total);
  if (!report.failure.empty() || report.interrupted) return report;
  if (options.only_chunks)
    out.sink->finish();
  else
    finish_scenario(scenario, plan, *out.sink);
  return report;
}

std::string serve_chunks(const Scenario* scenario, const Plan* plan, int threads, Transport& transport,
                         const std::function<std::string(const ChunkResult&)>& encode, std::string failure,
                         const std::function<void()>& on_result) {
  const std::size_t slots = static_cast<std::size_t>(threads > 0 ? threads : 1) * 2 + 2;
  Mailbox<std::size_t> assigned;
  std::optional<Computer> computer;
  if (failure.empty())
    computer.emplace(
        *scenario, *plan, threads, [&] { return assigned.pop_wait(); }, on_result);

  bool stopped = false, failure_sent = false;
  std::size_t pending = 0;      // chunks asked for, not yet assigned
  std::size_t outstanding = 0;  // chunks assigned, results not yet sent
  for (;;) {
    if (computer && computer->ended() && failure.empty()) failure = computer->error();
    if (!failure.empty() && !failure_sent) {
      transport.send(0, tag_failed, failure);
      failure_sent = true;
      assigned.close();
    }
    if (!stopped && !failure_sent && outstanding + pending < slots) {
      const auto want = static_cast<std::uint32_t>(slots - outstanding - pending);
      transport.send(0, tag_request, bytes_of(want));
      pending += want;
    }
    while (auto m = transport.poll(0)) {
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
        transport.send(0, tag_result, bytes_of(static_cast<std::uint64_t>(r->spec.id)) + encode(*r));
        --outstanding;
      }
    const bool computing = computer && !computer->ended();
    // Done when told to stop and everything computed is sent, or after a
    // failure (its report is the last message; peer 0 sends it no stop).
    if (failure_sent && !computing) break;
    if (stopped && !computing && (!computer || computer->results.empty())) break;
    if (computer)
      computer->results.wait_for(1);
    else
      std::this_thread::sleep_for(std::chrono::milliseconds(1));
  }
  if (computer) computer->join();
  if (!failure_sent) transport.send(0, tag_done, {});
  return failure;
}

}  // namespace covergrid::engine
