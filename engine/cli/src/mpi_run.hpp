#pragma once
/// The MPI front end, built only with -DCOVERGRID_MPI=ON: `mpirun -n R
/// covergrid run SCENARIO` spreads the chunks over R ranks. Rank 0 reads the
/// scenario, owns the journal and the cube, and deals chunk ids one at a time
/// to whichever rank asks (so a slow rank takes fewer); every rank, rank 0
/// included, computes its chunks with oneTBB and sends the results to rank
/// 0, which appends them to the journal as they arrive. The dealing itself
/// is the engine's (engine::deal_chunks, engine::serve_chunks in
/// engine/src/dealing.cpp) over MPI as its Transport; this layer adds the
/// session, the broadcast of the scenario and the final exit status. No rank holds more
/// than its chunks in flight; the cube is assembled from the journal chunk by
/// chunk, as in a single-process run, so its datasets are the same bytes.
/// A failing rank reports to rank 0, which stops dealing, collects what the
/// others finish, and exits 1 naming the rank; the journal holds every chunk
/// that came in, and any later run (MPI or not) resumes from it.
#include "covergrid/engine/plan.hpp"
#include "covergrid/engine/run.hpp"
#include "covergrid/engine/scenario.hpp"
#include "covergrid/output/cube.hpp"

namespace covergrid::cli::mpi {

/// MPI for the life of the process when it was started by an MPI launcher
/// (Open MPI's mpirun, or a PMI/PMIx launcher such as srun); otherwise MPI is
/// never initialised and covergrid runs as one process.
class Session {
 public:
  Session(int* argc, char*** argv);
  ~Session();
  Session(const Session&) = delete;
  Session& operator=(const Session&) = delete;
  /// Ends MPI: rank 0 sends its exit status to the others, which wait for it
  /// without spinning and return it (or their own failure). Returns the
  /// process's exit status.
  int finish(int status);
};

/// More than one rank.
bool active();
int rank();
int size();

/// Rank 0, when no work is dealt (nothing to do, or an error before the
/// start): the other ranks return from serve() with `status`. Does nothing
/// once work was announced.
void release_ranks(int status);

/// Ranks > 0 in `run`: waits for rank 0's scenario, then computes the chunks
/// it deals on `threads` threads; returns the exit status.
int serve(int threads);

/// Rank 0: sends the scenario to the others, then deals every chunk that
/// `writer` does not have (only `options.only_chunks` for a shard), writes
/// the results to it, and finishes the cube like run_scenario. On a rank's
/// failure or a stop request it returns without finishing (report.failure or
/// report.interrupted set).
engine::RunReport run_ranks(const engine::Scenario& scenario, const engine::Plan& plan,
                            output::CubeWriter& writer, const engine::RunOptions& options);

}  // namespace covergrid::cli::mpi
