// Running the units of `dobudget plan` on MPI ranks (docs/clusters.md, "MPI"; issue 5). Compiled only in
// MPI builds (DOBUDGET_WITH_MPI); nothing outside src/mpi includes <mpi.h>.
//
//   mpirun -n P dobudget plan STUDY.yaml --out DIR [--threads T] [--shard K/N]
//
// Every rank parses the same command line and loads the same study. Rank 0 runs plan_study as a
// single process would, with the Coordinator below as PlanOptions::executor: it alone touches the
// run directory (journal, tables, manifest) and prints. Ranks 1..P-1 run serve_as_worker and print
// nothing but their own fatal errors. Results do not depend on P: a unit's random streams are
// keyed by the unit, and its rows travel as the journal's text, which reads back to the same doubles.
//
// Dynamic distribution ("who finishes early takes more"). Units are handed out in the order of
// `todo` (canonical order), from one queue on rank 0. Rank 0 computes too: T local threads take
// units from that queue one at a time and deliver them directly, while rank 0's main thread serves
// the other ranks (MPI_THREAD_FUNNELED: only main threads call MPI). A worker rank runs T compute
// threads and gets one batch of consecutive units per free thread, by guided self-scheduling
// (Polychronopoulos and Kuck 1987, mpi_executor.cpp): ceil(R / 2S) of the R units left, S the
// threads of all ranks, so batches start large (few messages per unit) and shrink to single
// units at the end, which keeps the tail balanced to within about one unit per thread. Each process builds a DrawContext once per
// (scenario, draw) it meets, shares it between its threads and releases it when the units handed
// out (in canonical order) have moved past its draw and its last unit here has finished. Why rank 0 computes: with a
// dedicated coordinator, 2 ranks would give 1 worker (at most 50% efficiency from 1 to 2 ranks);
// serving costs rank 0's main thread about 2 us of CPU per unit and 10 us per message
// (DEVELOPERS.md, "MPI hand-out rate": 280,000-640,000 units per CPU second, enough for 7,000 to
// 16,000 threads of 25 ms units, the fewer when RESULTs hold fewer units). A RESULT
// that does not decode ends the job with MPI_Abort (how many units it held is unknown), before any
// of its units is recorded.
//
// Threads: --threads T applies to every rank; without it each rank takes its node's cores divided
// by the ranks on that node. OpenMPI binds each rank to one core when P <= 2 (to a socket above),
// so several threads per rank need `mpirun --bind-to none` or `--map-by slot:PE=T`.
//
// Messages (MPI_COMM_WORLD; every message is between rank 0 and one worker rank):
//   tag 1 READY   worker -> 0  one int: the worker's number of compute threads (its slots); sent
//                              once, when the worker has loaded the study.
//   tag 2 ASSIGN  0 -> worker  unsigned long longs: a batch, the indices of units (into
//                              enumerate_units) to compute, in canonical order: 0 then (first,
//                              count, stride) runs (one run for a fresh directory or a --shard run),
//                              or 1 then every index when runs would not be shorter; the worker
//                              refuses one not ascending, distinct and below the number of units.
//                              Rank 0 sends one batch per free slot, i.e. while fewer units than
//                              `slots` are in flight.
//   tag 3 RESULT  worker -> 0  chars: the units.journal records (io/journal.hpp: index, CRC-32,
//                              rows as runs.csv lines with ",<fit_seconds>"; shortest round-trip
//                              numbers, so the rows read back exactly) of every unit the worker
//                              finished since its last message. Sent at once when rank 0 would hand
//                              out work on it (the worker would then hold fewer units than slots) or
//                              on a stop or failure, else when the oldest has waited 0.5 s (a killed
//                              job loses at most that much finished work per worker thread besides
//                              the units running; SIGTERM loses none); rank 0 checks and decodes them once
//                              (io::Journal::parse_batch: CRC-32, rows checked as resume checks them
//                              by io::unit_rows_problem, assigned to this rank), appends the text as received with one write and one fflush
//                              (ExecutorHooks::on_records, Journal::append_batch) and refills the
//                              freed slots with ASSIGNs while work is left.
//   tag 4 STOP    0 -> worker  empty: no more work; sent once, when the queue is exhausted (or a
//                              stop was requested, or a unit failed) and the worker has nothing in
//                              flight, so no message is ever left unreceived.
//   tag 5 CANCELLED worker -> 0  unsigned long longs: units cut short by a stop (stop.hpp), or
//                              of a batch not yet started; nothing is recorded of them. Rank 0 then stops the run as
//                              if it had been signalled itself (a rank that stops would cut short
//                              every unit handed to it again).
//   tag 6 CANCEL  0 -> worker  empty: a stop was requested on rank 0; the worker abandons the units
//                              it holds (each answers RESULT if it was finished, else CANCELLED).
//                              Sent once per worker holding units, when rank 0 first sees the stop.
//   tag 7 FAILED  worker -> 0  chars: the error of a unit that failed on the worker, sent after the
//                              RESULT of the units it finished; rank 0 ends the job with it.
// Rank 0 sends with blocking MPI_Send; a worker sends with MPI_Isend only and keeps probing while
// a send is outstanding, so rank 0 may wait for a worker but never a worker for rank 0: no cycle
// of waits (deadlock), whatever the messages' sizes.
// Rank 0 calls hooks.on_records (or, when it is not set, hooks.on_unit per unit) for remote units
// from its main thread and hooks.on_unit for local units from its compute threads, always under
// one mutex (never two at once). When hooks.stop_requested() turns
// true (SIGTERM or SIGINT on rank 0), no new unit is handed out, the units in progress are cut
// short (rank 0's own through the stop token, the workers' by CANCEL, or by their own signal: mpirun
// signals every rank), finished ones are still recorded, cut ones never, and then every worker is
// stopped: the journal holds only complete units and a rerun resumes. A failure on a worker (an exception while computing) is
// sent to rank 0 as FAILED after the RESULT of the units that worker finished; rank 0, which
// receives one sender's messages in order, has journaled them by then, prints the error with the
// rank and ends the job with MPI_Abort (it cannot finish without that unit), so a rerun resumes. A failure on
// rank 0 stops handing out work, collects what is in flight, stops the workers and is rethrown.
//
// Waiting without stealing the compute threads' cores: blocking MPI receives spin in OpenMPI, so
// the main threads poll with MPI_Iprobe and sleeps, backing off from 50 us after a message to a
// cap. Rank 0's cap is 1% of the mean unit time, within [1 ms, 10 ms] (each wake-up costs about
// 50 us of a shared core in a virtual machine; each ms of cap delays a worker's next unit by half
// a ms). A worker holding at least one unit per slot expects no message but CANCEL, so it sleeps until a
// unit finishes or 100 ms pass (10 wake-ups a second: a stop reaches its units within about 0.1 s);
// with a free slot it polls for rank 0's reply, capped at 1 ms.
#pragma once
#include <cstddef>
#include <functional>
#include <vector>

#include "core/running/runner.hpp"
#include "core/running/settings.hpp"
#include "core/running/unit.hpp"
#include "io/run_directory.hpp"

namespace dobudget::mpi {

// MPI for the lifetime of the object: MPI_Init_thread(MPI_THREAD_FUNNELED) and MPI_Finalize.
// Construct it on the main thread, once per process.
class Session {
 public:
  Session();
  ~Session();
  Session(const Session&) = delete;
  Session& operator=(const Session&) = delete;

  int rank() const { return rank_; }
  int size() const { return size_; }
  // Ranks sharing this rank's node (MPI_COMM_TYPE_SHARED), to split the node's cores among them.
  int ranks_on_this_node() const { return node_size_; }

  // Collective: each rank says whether it is ready to take part (for instance, loaded the study).
  struct Agreement {
    bool root_ok = false;  // rank 0 is ready
    bool all_ok = false;   // every rank is ready
  };
  Agreement agree(bool ok) const;

 private:
  int rank_ = 0;
  int size_ = 1;
  int node_size_ = 1;
};

// Rank 0's executor: has PlanOptions::executor's signature (use it through a lambda or std::ref,
// it keeps state). It returns once every worker has been told to stop.
class Coordinator {
 public:
  explicit Coordinator(const Session& session);
  void operator()(const Study& study, const std::vector<UnitId>& units, const std::vector<std::size_t>& todo,
                  int threads, const io::ExecutorHooks& hooks);
  // Stops the workers if the executor has not run, so that they are not left waiting when
  // plan_study fails before it hands out work (a directory of another study, say). Idempotent.
  void release_workers();
  // Units computed (and delivered) by each rank so far: how the dynamic distribution balanced.
  const std::vector<std::size_t>& units_by_rank() const { return units_by_rank_; }
  // ASSIGN messages sent so far (each a batch of units).
  std::size_t batches() const { return batches_; }
  // CPU seconds rank 0's main thread spent serving the workers (handing out, receiving, journaling
  // their units, polling): units of ranks 1..P-1 divided by it is the rate rank 0 can hand out.
  double serving_cpu_seconds() const { return serving_cpu_seconds_; }
  // Of it, the CPU seconds spent on messages (receiving, journaling, replying): without the idle
  // polls, which a busy rank 0 no longer makes. And the RESULT messages received.
  double handling_cpu_seconds() const { return handling_cpu_seconds_; }
  std::size_t result_messages() const { return result_messages_; }

 private:
  int size_;
  bool workers_stopped_ = false;
  std::vector<std::size_t> units_by_rank_;
  std::size_t batches_ = 0;
  double serving_cpu_seconds_ = 0.0;
  double handling_cpu_seconds_ = 0.0;
  std::size_t result_messages_ = 0;
};

// Ranks 1..P-1: announce `threads` slots to rank 0, compute the units it assigns on that many
// threads, send back their rows, return when told to stop. Never touches the run directory.
// `stop_requested` (this rank's signal, thread-safe) cuts the units in progress short, like CANCEL.
void serve_as_worker(const Study& study, int threads, std::function<bool()> stop_requested = {});

}  // namespace dobudget::mpi
