#pragma once
/// Distributed runs: chunks dealt by peer 0 to the peers of a run over a
/// message layer (MPI ranks in the cluster build; threads in the tests), so
/// that the whole-run, shard and distributed paths share the engine's one
/// chunk scheduler (compute_feed on every peer) and the dealing lives in the
/// engine, not in the command line.
///
/// Peer 0 owns the sink (journal and cube). It deals chunk ids one at a time
/// to whichever peer asks (a slow peer takes fewer), computes chunks itself
/// too, and writes every result as it arrives; a peer never holds more than
/// the chunks it has in flight. A failing peer reports to peer 0, which stops
/// dealing, collects what the others finish and returns the failure; the
/// sink holds every chunk that came in, and any later run resumes from it.
///
/// Messages (tag = kind, bytes as below):
///   peer -> 0: request (uint32 how many more chunks), result (uint64 chunk
///              id, then the encoded chunk), failed (text), done (empty; the
///              peer's last message)
///   0 -> peer: assign (uint64 chunk id), stop (no more chunks)
/// Tags 1..6 are these; a transport may use others for itself.
#include "covergrid/engine/plan.hpp"
#include "covergrid/engine/run.hpp"
#include "covergrid/engine/scenario.hpp"
#include "covergrid/engine/sink.hpp"

#include <functional>
#include <optional>
#include <string>

namespace covergrid::engine {

/// One message between peers.
struct Envelope {
  int source = 0;
  int tag = 0;
  std::string bytes;
};

/// What dealing needs of a message layer: numbered peers (0 deals) and
/// tagged byte messages between them, delivered in order per sender.
class Transport {
 public:
  virtual ~Transport() = default;
  /// The number of peers, this one included.
  virtual int peers() const = 0;
  /// Sends `bytes` to peer `to` (never to itself).
  virtual void send(int to, int tag, const std::string& bytes) = 0;
  /// The next message from peer `from` (any peer when -1), or nullopt at
  /// once when none is waiting: never blocks.
  virtual std::optional<Envelope> poll(int from = -1) = 0;
};

/// How peer 0 stores chunks: computed ones through the sink, received ones
/// as the bytes the other peers encoded (`encode` there).
struct DealtSink {
  ResultSink* sink = nullptr;
  std::function<void(std::size_t chunk, const std::string& encoded)> write_encoded;
};

/// Peer 0: deals every chunk the sink lacks (only options.only_chunks for a
/// shard) to the peers and to its own computing thread, stores every result,
/// and finishes the output like run_scenario (a shard: sink.finish() alone).
/// On a peer's failure (report.failure names it) or a stop request
/// (report.interrupted) it checkpoints and returns without finishing.
RunReport deal_chunks(const Scenario& scenario, const Plan& plan, const DealtSink& out,
                      const RunOptions& options, Transport& transport);

/// Peers > 0: computes the chunks peer 0 deals, on `threads` threads, and
/// sends each result encoded by `encode`. `failure` non-empty (the peer
/// could not even read the scenario): reports it and computes nothing.
/// `on_result` (a test hook) runs before each result is queued and may
/// throw to fail the peer. Returns the failure reported, empty when none.
std::string serve_chunks(const Scenario* scenario, const Plan* plan, int threads, Transport& transport,
                         const std::function<std::string(const ChunkResult&)>& encode,
                         std::string failure = {}, const std::function<void()>& on_result = {});

}  // namespace covergrid::engine
