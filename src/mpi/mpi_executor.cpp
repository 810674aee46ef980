#include "mpi/mpi_executor.hpp"

#include <fmt/format.h>
#include <mpi.h>

#include <algorithm>
#include <atomic>
#include <chrono>
#include <condition_variable>
#include <cstdio>
#include <ctime>
#include <deque>
#include <exception>
#include <iterator>
#include <list>
#include <map>
#include <memory>
#include <mutex>
#include <optional>
#include <stdexcept>
#include <string>
#include <thread>
#include <utility>

#include "core/running/stop.hpp"
#include "io/expected_rows.hpp"
#include "io/journal.hpp"
#include "io/text_escape.hpp"
#include "mpi/assign_message.hpp"
#include "io/run_directory.hpp"

namespace dobudget::mpi {
namespace {

enum Tag : int {
  ready_tag = 1,
  assign_tag = 2,
  result_tag = 3,
  stop_tag = 4,
  cancelled_tag = 5,
  cancel_tag = 6,
  failed_tag = 7,  // worker -> rank 0: a unit failed; the text says why; rank 0 ends the job
};

// The longest FAILED text rank 0 prints (the rest is cut): a garbled message cannot flood stderr.
constexpr std::size_t failed_text_limit = 2000;

// How long a worker that sent FAILED waits for rank 0 to end the job before ending it itself.
constexpr std::chrono::seconds failed_grace{60};

// One DrawContext per (scenario, draw), built by whichever thread of this process needs it first
// and released once the run has moved past its draw. Units are handed out in the order of `todo`,
// which is canonical (scenario, draw, replicate), so when a unit of a later draw is taken no unit
// of an earlier draw will come again: take() (called, in handing-out order, under the lock that
// orders the units) drops the cache's hold on every earlier draw, and the threads still computing
// a unit of one keep its context alive until they finish. A process thus holds at most one context
// per compute thread, plus the latest (the threaded runner's bound, runner.hpp). Were units ever
// taken out of order, a dropped context would be built again: the same context (it is keyed by
// the draw), at the cost of building it twice.
class DrawContextCache {
 public:
  class Handle {
   public:
    // The draw's context, built by the first thread that asks for it.
    const DrawContext& get(const Study& study, const UnitId& u, const StopToken& stop) const {
      std::call_once(slot_->once, [&] { slot_->context = make_draw_context(study, u.scenario, u.draw, stop); });
      return slot_->context;
    }

   private:
    friend class DrawContextCache;
    struct Slot {
      std::once_flag once;
      DrawContext context;
    };
    std::shared_ptr<Slot> slot_;
  };

  // The unit's draw, and the end of the cache's hold on every earlier draw.
  Handle take(const UnitId& u) {
    std::lock_guard lock(mutex_);
    const std::pair<int, int> key{u.scenario, u.draw};
    slots_.erase(slots_.begin(), slots_.lower_bound(key));
    auto& slot = slots_[key];
    if (!slot) slot = std::make_shared<Handle::Slot>();
    Handle h;
    h.slot_ = slot;
    return h;
  }

 private:
  std::mutex mutex_;
  std::map<std::pair<int, int>, std::shared_ptr<Handle::Slot>> slots_;
};

// A RESULT message holds the units.journal records (io/journal.hpp) of one or more units, each
// "<unit index> TAB <CRC-32> TAB <rows>" LF, each row a runs.csv line and ",<fit_seconds>" in the
// shortest text that reads back to the same double, so a unit computed on another rank is recorded
// exactly as if computed here (the text is journaled as received: Journal::append_batch), and a
// message garbled in transit is caught by the checksums (Journal::parse_batch) before any of it is
// recorded. Each record's rows are then checked as resume checks them (io::unit_rows_problem: the
// unit exists, the row count, every row's key and measures), so a RESULT that a later resume
// would refuse is refused here, before anything of it is journaled.

// Guided self-scheduling (C. D. Polychronopoulos and D. J. Kuck, "Guided self-scheduling: a
// practical scheduling scheme for parallel supercomputers", IEEE Trans. Computers 36(12), 1987):
// a free slot takes ceil(R / S) of the R units left, S the compute threads of all ranks, so
// batches are large while much is left and shrink to one unit at the end. Here the divisor is 2S
// (half of GSS's batch, as in factoring, Hummel, Schonberg and Flynn, CACM 35(8), 1992), so that a
// batch holding slower units than average still finishes before the others run dry: the tail is
// balanced to within about one unit per thread, as when units went one at a time.
std::size_t batch_size(std::size_t remaining, std::size_t slots_total) {
  const std::size_t d = 2 * std::max<std::size_t>(1, slots_total);
  return std::max<std::size_t>(1, (remaining + d - 1) / d);
}

// Units assigned to a worker but not started when a stop comes are cut short at once: moved from
// the queue to the list reported as CANCELLED.
void queue_cancelled(std::deque<std::size_t>& queue, std::deque<unsigned long long>& cut) {
  for (std::size_t index : queue) cut.push_back(index);
  queue.clear();
}

using Clock = std::chrono::steady_clock;
using Micros = std::chrono::microseconds;

// Sleep between polls: 50 us right after a message, doubling while nothing happens, up to a cap.
class Backoff {
 public:
  void reset() { wait_ = Micros(50); }
  Micros next(Micros cap) {
    const Micros w = std::min(wait_, cap);
    wait_ = std::min(wait_ * 2, cap);
    return w;
  }

 private:
  Micros wait_{50};
};

// How long a worker holds the records of finished units while it still has work (it sends them
// sooner when rank 0 would hand it more, or on a stop): a killed job (SIGKILL: SIGTERM still sends
// them) loses at most this much finished work per worker thread besides the units running, and a
// worker sends at most about 1 / result_flush_interval RESULTs a second that hand out nothing.
constexpr std::chrono::milliseconds result_flush_interval{500};

// Rank 0's cap: 1% of the mean unit time, within [1 ms, 10 ms]. Every wake-up costs the core it
// shares with a compute thread (measured: about 50 us in a virtual machine here, so polling every
// 200 us slowed units by 20%), while a longer cap delays a worker's next unit by half the cap on
// average: 1% of a unit balances the two (units of about 1 s: 0.5% each).
Micros poll_cap(double mean_unit_seconds) {
  const auto cap = static_cast<long long>(mean_unit_seconds * 1e6 / 100);
  return Micros(std::clamp<long long>(cap, 1000, 10000));
}

// CPU seconds used by the calling thread (POSIX CLOCK_THREAD_CPUTIME_ID).
double thread_cpu_seconds() {
  timespec t{};
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &t);
  return static_cast<double>(t.tv_sec) + 1e-9 * static_cast<double>(t.tv_nsec);
}

double seconds_since(Clock::time_point t) { return std::chrono::duration<double>(Clock::now() - t).count(); }

std::string what(const std::exception_ptr& e) {
  try {
    std::rethrow_exception(e);
  } catch (const std::exception& x) {
    return x.what();
  } catch (...) {
    return "unknown exception";
  }
}

// Reports and ends every rank of the job: used where waiting for a clean stop could hang.
[[noreturn]] void abort_job(int rank, const std::string& message) {
  std::fprintf(stderr, "error (MPI rank %d): %s; aborting the MPI job\n", rank, message.c_str());
  std::fflush(stderr);
  MPI_Abort(MPI_COMM_WORLD, 1);
  std::abort();  // not reached
}

}  // namespace

// ---------------------------------------------------------------------------------------------
// Session

Session::Session() {
  int provided = 0;
  MPI_Init_thread(nullptr, nullptr, MPI_THREAD_FUNNELED, &provided);
  MPI_Comm_rank(MPI_COMM_WORLD, &rank_);
  MPI_Comm_size(MPI_COMM_WORLD, &size_);
  if (provided < MPI_THREAD_FUNNELED) abort_job(rank_, "the MPI library does not provide MPI_THREAD_FUNNELED");
  MPI_Comm node;
  MPI_Comm_split_type(MPI_COMM_WORLD, MPI_COMM_TYPE_SHARED, 0, MPI_INFO_NULL, &node);
  MPI_Comm_size(node, &node_size_);
  MPI_Comm_free(&node);
}

Session::~Session() { MPI_Finalize(); }

Session::Agreement Session::agree(bool ok) const {
  int mine[2] = {rank_ == 0 ? static_cast<int>(ok) : 1, static_cast<int>(ok)};
  int all[2] = {0, 0};
  MPI_Allreduce(mine, all, 2, MPI_INT, MPI_MIN, MPI_COMM_WORLD);
  return {all[0] == 1, all[1] == 1};
}

// ---------------------------------------------------------------------------------------------
// Rank 0

Coordinator::Coordinator(const Session& session)
    : size_(session.size()), units_by_rank_(static_cast<std::size_t>(session.size()), 0) {}

void Coordinator::release_workers() {
  if (!workers_stopped_) (*this)(Study{}, {}, {}, 1, io::ExecutorHooks{});
}

void Coordinator::operator()(const Study& study, const std::vector<UnitId>& units, const std::vector<std::size_t>& todo,
                             int threads, const io::ExecutorHooks& hooks) {
  if (workers_stopped_) {  // a second call: the workers are gone, this process computes alone
    run_units(study, units, todo, threads, hooks);
    return;
  }
  // The queue, the first failure, unit times and on_unit: all under one mutex.
  std::mutex mutex;
  std::size_t next = 0;
  std::exception_ptr failure;
  std::atomic<bool> worker_cancelled{false};  // a worker reported CANCELLED: stop as if signalled
  const StopToken stop([&] {
    return worker_cancelled.load() || (hooks.stop_requested && hooks.stop_requested());
  });
  double unit_seconds = 0.0;  // summed over finished units (remote: from ASSIGN to RESULT)
  std::size_t units_timed = 0;
  DrawContextCache cache;  // rank 0's own compute threads
  // Up to `slots_total` / guided self-scheduling's batch of the units left, for one free slot of a worker.
  auto take_batch = [&](std::size_t slots_total) {
    std::vector<unsigned long long> batch;
    std::lock_guard lock(mutex);
    if (failure || next >= todo.size() || stop.requested()) return batch;
    const std::size_t n = std::min(batch_size(todo.size() - next, slots_total), todo.size() - next);
    batch.resize(n);
    for (std::size_t k = 0; k < n; ++k) batch[k] = todo[next + k];
    next += n;
    return batch;
  };
  // A unit for a local thread, with its draw taken from the cache in the order units are handed out.
  auto take_local = [&]() -> std::optional<std::pair<std::size_t, DrawContextCache::Handle>> {
    std::lock_guard lock(mutex);
    if (failure || next >= todo.size() || stop.requested()) return std::nullopt;
    const std::size_t i = todo[next++];
    return std::pair{i, cache.take(units[i])};
  };
  auto fail = [&](std::exception_ptr e) {
    std::lock_guard lock(mutex);
    if (!failure) failure = std::move(e);
  };
  auto deliver = [&](int rank, std::size_t index, std::vector<RunRecord>&& rows, double seconds) {
    std::lock_guard lock(mutex);
    ++units_by_rank_[static_cast<std::size_t>(rank)];
    unit_seconds += seconds;
    ++units_timed;
    try {
      if (hooks.on_unit) hooks.on_unit(index, std::move(rows));
    } catch (...) {
      if (!failure) failure = std::current_exception();
    }
  };
  // A worker's RESULT, checked and decoded: journaled with one write (on_records), or unit by unit
  // when the caller takes single units only.
  auto deliver_batch = [&](int rank, io::Journal::Batch&& batch, double seconds) {
    std::lock_guard lock(mutex);
    const std::size_t n = batch.units.size();
    units_by_rank_[static_cast<std::size_t>(rank)] += n;
    unit_seconds += seconds;
    units_timed += n;
    try {
      if (hooks.on_records) {
        hooks.on_records(std::move(batch));
      } else if (hooks.on_unit) {
        for (auto& [index, rows] : batch.units) hooks.on_unit(index, std::move(rows));
      }
    } catch (...) {
      if (!failure) failure = std::current_exception();
    }
  };

  // Rank 0's own compute threads.
  std::vector<std::thread> pool;
  const int local_threads = todo.empty() ? 0 : std::max(1, threads);
  for (int t = 0; t < local_threads; ++t)
    pool.emplace_back([&] {
      try {
        while (const auto taken = take_local()) {
          const auto& [i, draw] = *taken;
          const auto start = Clock::now();
          auto rows = run_unit(study, units[i], draw.get(study, units[i], stop), stop);
          deliver(0, i, std::move(rows), seconds_since(start));
        }
      } catch (const Cancelled&) {
        // cut short by a stop: nothing delivered, and take() hands out nothing more
      } catch (...) {
        fail(std::current_exception());
      }
    });

  // The main thread serves the other ranks until every one of them has been stopped.
  struct Peer {
    int slots = 0;      // 0 until its READY
    int in_flight = 0;  // units assigned and not answered
    Clock::time_point last_result{};
  };
  std::vector<Peer> peers(static_cast<std::size_t>(size_));
  // Remote units in flight, by unit index: the rank holding it (0: none) and when it was assigned.
  // A vector, not a map: rank 0 touches it twice per unit, and units.size() entries are small.
  struct Assignment {
    int rank = 0;
    Clock::time_point sent{};
  };
  std::vector<Assignment> assigned(todo.empty() ? 0 : units.size());
  int stopped = 0;
  bool cancel_sent = false;
  // Compute threads of the whole job, for the batch size: a rank not yet READY is counted with
  // rank 0's number of threads (the same --threads, or the same share of a node's cores). Kept as
  // a running total (corrected at each READY), not summed over the ranks for every batch.
  const std::size_t assumed_slots = static_cast<std::size_t>(std::max(1, threads));
  std::size_t slots_total = static_cast<std::size_t>(local_threads) + static_cast<std::size_t>(size_ - 1) * assumed_slots;
  auto refill = [&](int rank) {
    Peer& p = peers[static_cast<std::size_t>(rank)];
    while (p.in_flight < p.slots) {  // one batch per free slot
      const std::vector<unsigned long long> batch = take_batch(slots_total);
      if (batch.empty()) break;
      const std::vector<unsigned long long> message = encode_assign(batch);
      // Blocking: it returns once the worker has the message (at once for a short one, copied
      // eagerly). No cycle: a worker never blocks in a send (serve_as_worker), so it keeps
      // polling and takes this message whatever it is sending meanwhile.
      MPI_Send(message.data(), static_cast<int>(message.size()), MPI_UNSIGNED_LONG_LONG, rank, assign_tag, MPI_COMM_WORLD);
      ++batches_;
      const auto now = Clock::now();
      for (unsigned long long i : batch) assigned[static_cast<std::size_t>(i)] = {rank, now};  // i < units.size(): from todo
      p.in_flight += static_cast<int>(batch.size());
    }
    if (p.in_flight == 0) {
      MPI_Send(nullptr, 0, MPI_BYTE, rank, stop_tag, MPI_COMM_WORLD);
      ++stopped;
    }
  };
  const double cpu_at_start = thread_cpu_seconds();
  try {
    Backoff backoff;
    while (stopped < size_ - 1) {
      if (!cancel_sent && stop.requested()) {  // cut the workers' units short too
        cancel_sent = true;
        for (int r = 1; r < size_; ++r)
          if (peers[static_cast<std::size_t>(r)].in_flight > 0)
            MPI_Send(nullptr, 0, MPI_BYTE, r, cancel_tag, MPI_COMM_WORLD);
      }
      int flag = 0;
      MPI_Status status;
      MPI_Iprobe(MPI_ANY_SOURCE, MPI_ANY_TAG, MPI_COMM_WORLD, &flag, &status);
      if (!flag) {
        double mean = 0.0;
        {
          std::lock_guard lock(mutex);
          if (units_timed > 0) mean = unit_seconds / static_cast<double>(units_timed);
        }
        std::this_thread::sleep_for(backoff.next(poll_cap(mean)));
        continue;
      }
      backoff.reset();
      const double cpu_at_message = thread_cpu_seconds();
      const int rank = status.MPI_SOURCE;
      Peer& p = peers[static_cast<std::size_t>(rank)];
      if (status.MPI_TAG == ready_tag) {
        int slots = 0;
        MPI_Recv(&slots, 1, MPI_INT, rank, ready_tag, MPI_COMM_WORLD, MPI_STATUS_IGNORE);
        if (p.slots > 0) throw std::runtime_error(fmt::format("rank {} sent READY twice", rank));
        p.slots = std::max(1, slots);
        slots_total = slots_total - assumed_slots + static_cast<std::size_t>(p.slots);
      } else if (status.MPI_TAG == result_tag) {
        ++result_messages_;
        int count = 0;
        MPI_Get_count(&status, MPI_CHAR, &count);
        std::string text(static_cast<std::size_t>(count), '\0');
        MPI_Recv(text.data(), count, MPI_CHAR, rank, result_tag, MPI_COMM_WORLD, MPI_STATUS_IGNORE);
        try {
          // Decoded once (CRC-32 and the rows checked against their unit as resume checks them),
          // then journaled as received.
          io::Journal::Batch batch = io::Journal::parse_batch(
              std::move(text), fmt::format("MPI result from rank {}", rank),
              [&](std::size_t index, const std::vector<RunRecord>& rows) {
                return io::unit_rows_problem(study, units, index, rows);
              });
          for (const auto& unit : batch.units)  // every unit first, so that nothing of a bad message is recorded
            if (unit.first >= assigned.size() || assigned[unit.first].rank != rank)
              throw std::runtime_error(fmt::format("rank {} sent unit {}, which it was not assigned", rank, unit.first));
          // A unit's time, for the poll cap only: from the later of its ASSIGN and this rank's
          // previous RESULT to now, shared by the units of the message and multiplied by the
          // threads that were busy on them (units of a batch wait in the worker's queue).
          const auto now = Clock::now();
          const int busy = std::max(1, std::min(p.slots, p.in_flight));
          double seconds = 0.0;
          for (const auto& unit : batch.units) {
            Assignment& a = assigned[unit.first];
            seconds += std::chrono::duration<double>(now - std::max(a.sent, p.last_result)).count() * busy /
                       static_cast<double>(batch.units.size());
            a.rank = 0;
          }
          p.in_flight -= static_cast<int>(batch.units.size());
          p.last_result = now;
          deliver_batch(rank, std::move(batch), seconds);
        } catch (...) {
          abort_job(0, what(std::current_exception()));  // a unit record lost: in-flight counts are wrong
        }
      } else if (status.MPI_TAG == failed_tag) {
        // A worker's unit failed. MPI delivers one sender's messages in the order it sent them,
        // so every RESULT it sent before this one has been received and journaled above. Under
        // the mutex no local thread is writing the journal when the job ends.
        int count = 0;
        MPI_Get_count(&status, MPI_CHAR, &count);
        std::string text(static_cast<std::size_t>(std::max(0, count)), '\0');
        MPI_Recv(text.data(), std::max(0, count), MPI_CHAR, rank, failed_tag, MPI_COMM_WORLD, MPI_STATUS_IGNORE);
        if (text.size() > failed_text_limit) text.resize(failed_text_limit);
        std::lock_guard lock(mutex);
        abort_job(0, fmt::format("rank {}: {} (the units journaled so far are kept in units.journal: run the same "
                                 "command again to compute only the missing ones)",
                                 rank, io::printable_line(text)));
      } else if (status.MPI_TAG == cancelled_tag) {
        int count = 0;
        MPI_Get_count(&status, MPI_UNSIGNED_LONG_LONG, &count);
        std::vector<unsigned long long> cut(static_cast<std::size_t>(std::max(0, count)));
        MPI_Recv(cut.data(), count, MPI_UNSIGNED_LONG_LONG, rank, cancelled_tag, MPI_COMM_WORLD, MPI_STATUS_IGNORE);
        for (unsigned long long index : cut) {
          if (index >= assigned.size() || assigned[static_cast<std::size_t>(index)].rank != rank)
            throw std::runtime_error(fmt::format("rank {} cancelled unit {}, which it was not assigned", rank, index));
          assigned[static_cast<std::size_t>(index)].rank = 0;
          --p.in_flight;
        }
        worker_cancelled = true;  // not recorded; no unit is handed out any more
      } else {
        throw std::runtime_error(fmt::format("unexpected MPI message (tag {}) from rank {}", status.MPI_TAG, rank));
      }
      refill(rank);
      handling_cpu_seconds_ += thread_cpu_seconds() - cpu_at_message;
    }
  } catch (const std::exception& e) {
    abort_job(0, e.what());  // the protocol itself broke: nobody can be stopped cleanly
  }
  serving_cpu_seconds_ += thread_cpu_seconds() - cpu_at_start;
  for (auto& t : pool) t.join();
  workers_stopped_ = true;
  if (failure) std::rethrow_exception(failure);
}

// ---------------------------------------------------------------------------------------------
// Ranks 1..P-1

void serve_as_worker(const Study& study, int threads, std::function<bool()> stop_requested) {
  int rank = 0;
  MPI_Comm_rank(MPI_COMM_WORLD, &rank);
  try {
    const std::vector<UnitId> units = enumerate_units(study);
    const int slots = std::max(1, threads);
    // Every message to rank 0 goes out with MPI_Isend and its buffer is kept here until MPI_Test
    // reports the send complete; MPI keeps them in the order posted. This thread never blocks in
    // a send, so it always comes back to MPI_Iprobe and takes what rank 0 sends. Rank 0 blocks
    // only in a send to one worker (an ASSIGN, CANCEL or STOP, completed when that worker takes
    // it) or in the MPI_Recv of a message already probed: rank 0 can wait for a worker, a worker
    // never waits for rank 0, so no cycle of waits (deadlock) can form, whatever the messages'
    // sizes. While a send is outstanding this thread polls at least every millisecond, so that
    // MPI moves a large message along while rank 0 receives it.
    struct Outgoing {
      MPI_Request request = MPI_REQUEST_NULL;
      std::string bytes;                     // RESULT
      std::vector<unsigned long long> words;  // CANCELLED
      int ready_slots = 0;                   // READY
    };
    // A list: erasing one send moves no other, so the buffers MPI reads (a short string's bytes
    // and ready_slots lie inside the element) stay where they were posted.
    std::list<Outgoing> sending;
    const auto send_done = [&] {  // drops the completed sends
      for (auto it = sending.begin(); it != sending.end();) {
        int done = 0;
        MPI_Test(&it->request, &done, MPI_STATUS_IGNORE);
        it = done ? sending.erase(it) : std::next(it);
      }
    };
    {
      Outgoing& o = sending.emplace_back();
      o.ready_slots = slots;
      MPI_Isend(&o.ready_slots, 1, MPI_INT, 0, ready_tag, MPI_COMM_WORLD, &o.request);
    }

    std::mutex mutex;
    std::condition_variable work_ready, result_ready;
    std::deque<std::size_t> queue;   // assigned, not started
    std::deque<std::string> outbox;  // finished, encoded, not sent
    std::deque<unsigned long long> cut;  // cut short by a stop, not yet reported (CANCELLED)
    std::exception_ptr failure;
    bool closed = false;
    std::atomic<bool> cancel{false};  // CANCEL from rank 0
    const StopToken cut_short([&] { return cancel.load() || (stop_requested && stop_requested()); });
    DrawContextCache cache;
    std::vector<std::thread> pool;
    for (int t = 0; t < slots; ++t)
      pool.emplace_back([&] {
        while (true) {
          std::size_t index = 0;
          DrawContextCache::Handle draw;
          {
            std::unique_lock lock(mutex);
            work_ready.wait(lock, [&] { return closed || !queue.empty(); });
            if (queue.empty()) return;
            index = queue.front();
            queue.pop_front();
            draw = cache.take(units[index]);  // in the order rank 0 assigned the units
          }
          try {
            const UnitId& u = units[index];
            std::string text = io::Journal::record(index, run_unit(study, u, draw.get(study, u, cut_short), cut_short));
            std::lock_guard lock(mutex);
            outbox.push_back(std::move(text));
          } catch (const Cancelled&) {
            std::lock_guard lock(mutex);
            cut.push_back(index);
          } catch (...) {
            const std::string message =
                fmt::format("unit (scenario {}, environment {}, replicate {}): {}", units[index].scenario,
                            units[index].draw, units[index].replicate, what(std::current_exception()));
            std::lock_guard lock(mutex);
            if (!failure) failure = std::make_exception_ptr(std::runtime_error(message));
          }
          result_ready.notify_one();
        }
      });

    Backoff backoff;
    bool stop = false;
    int held = 0;  // units assigned to this rank and not yet sent back (pending ones included)
    std::string pending;  // records of finished units not yet sent
    int pending_units = 0;
    Clock::time_point pending_since{};  // when the oldest of them was taken from the outbox
    try {  // inside the pool's scope: abort the job before joinable threads would be destroyed
      while (!stop) {
        std::deque<std::string> finished;
        std::deque<unsigned long long> abandoned;
        std::exception_ptr error;
        {
          std::lock_guard lock(mutex);
          finished.swap(outbox);
          abandoned.swap(cut);
          error = failure;
        }
        const auto now = Clock::now();
        for (const auto& record : finished) {
          if (pending_units++ == 0) pending_since = now;
          pending += record;
        }
        // Finished units go in one RESULT, cut ones in one CANCELLED: rank 0 pays per message. A
        // RESULT is sent at once when rank 0 would hand out work on it (after it, this rank would
        // hold fewer units than slots: rank 0 refills only then), when a stop or a failure is under
        // way, and otherwise once the oldest pending unit has waited result_flush_interval, so
        // that units of a long batch are not sent one message each.
        const bool needs_work = held - pending_units < slots;
        const bool stopping = error || !abandoned.empty() || cut_short.requested();
        if (pending_units > 0 && (needs_work || stopping || now - pending_since >= result_flush_interval)) {
          Outgoing& o = sending.emplace_back();
          o.bytes = std::move(pending);
          MPI_Isend(o.bytes.data(), static_cast<int>(o.bytes.size()), MPI_CHAR, 0, result_tag, MPI_COMM_WORLD, &o.request);
          held -= pending_units;
          pending.clear();
          pending_units = 0;
        }
        if (!abandoned.empty()) {
          Outgoing& o = sending.emplace_back();
          o.words.assign(abandoned.begin(), abandoned.end());
          MPI_Isend(o.words.data(), static_cast<int>(o.words.size()), MPI_UNSIGNED_LONG_LONG, 0, cancelled_tag,
                    MPI_COMM_WORLD, &o.request);
        }
        held -= static_cast<int>(abandoned.size());
        if (error) {
          // The finished units went out above (RESULT); FAILED follows them, and rank 0, which
          // receives this rank's messages in order, journals them before it ends the job with
          // this text. Meanwhile this rank keeps its sends moving; should rank 0 not end the job
          // within failed_grace, this rank ends it.
          cancel = true;  // the other units of this rank stop at their next check
          Outgoing& o = sending.emplace_back();
          o.bytes = what(error);
          MPI_Isend(o.bytes.data(), static_cast<int>(o.bytes.size()), MPI_CHAR, 0, failed_tag, MPI_COMM_WORLD,
                    &o.request);
          const auto deadline = Clock::now() + failed_grace;
          while (Clock::now() < deadline) {
            send_done();
            int incoming = 0;  // take and drop what rank 0 sends meanwhile, so its sends complete
            MPI_Status in{};
            MPI_Iprobe(0, MPI_ANY_TAG, MPI_COMM_WORLD, &incoming, &in);
            if (incoming) {
              int bytes = 0;
              MPI_Get_count(&in, MPI_BYTE, &bytes);
              std::vector<char> dropped(static_cast<std::size_t>(std::max(0, bytes)));
              MPI_Recv(dropped.data(), std::max(0, bytes), MPI_BYTE, 0, in.MPI_TAG, MPI_COMM_WORLD, MPI_STATUS_IGNORE);
            }
            std::this_thread::sleep_for(std::chrono::milliseconds(1));
          }
          abort_job(rank, what(error) + " (rank 0 did not end the job after this rank reported the failure)");
        }

        send_done();
        int flag = 0;
        MPI_Status status;
        MPI_Iprobe(0, MPI_ANY_TAG, MPI_COMM_WORLD, &flag, &status);
        if (flag) {
          backoff.reset();
          if (status.MPI_TAG == assign_tag) {
            int count = 0;
            MPI_Get_count(&status, MPI_UNSIGNED_LONG_LONG, &count);
            if (count == MPI_UNDEFINED || count < 0)
              abort_job(rank, "rank 0 sent an ASSIGN that is not a whole number of 64-bit words");
            std::vector<unsigned long long> message(static_cast<std::size_t>(count));
            MPI_Recv(message.data(), count, MPI_UNSIGNED_LONG_LONG, 0, assign_tag, MPI_COMM_WORLD, MPI_STATUS_IGNORE);
            const std::vector<std::size_t> batch = decode_assign(message, units.size());  // throws: abort below
            {
              std::lock_guard lock(mutex);
              for (std::size_t index : batch) queue.push_back(index);
            }
            held += static_cast<int>(batch.size());
            work_ready.notify_all();
          } else if (status.MPI_TAG == cancel_tag) {
            MPI_Recv(nullptr, 0, MPI_BYTE, 0, cancel_tag, MPI_COMM_WORLD, MPI_STATUS_IGNORE);
            cancel = true;  // the units held answer RESULT or CANCELLED; rank 0 then sends STOP
            {
              std::lock_guard lock(mutex);
              queue_cancelled(queue, cut);
            }
          } else if (status.MPI_TAG == stop_tag) {
            MPI_Recv(nullptr, 0, MPI_BYTE, 0, stop_tag, MPI_COMM_WORLD, MPI_STATUS_IGNORE);
            stop = true;  // rank 0 stops a worker only when it has nothing in flight
          } else {
            abort_job(rank, fmt::format("unexpected MPI message (tag {}) from rank 0", status.MPI_TAG));
          }
          continue;
        }
        if (!finished.empty() || !abandoned.empty()) backoff.reset();
        // Wake for a finished unit at once. Holding at least a unit per slot only CANCEL can come
        // (rank 0 writes to a worker only to fill a free slot, to stop one holding nothing, or to
        // cancel): look for it every 100 ms, or when pending units are due; otherwise a reply is
        // due soon: poll for it.
        const auto done = [&] { return !outbox.empty() || !cut.empty() || failure != nullptr; };
        std::unique_lock lock(mutex);
        if (!sending.empty()) {
          result_ready.wait_for(lock, backoff.next(Micros(1000)), done);  // keep the sends moving
        } else if (held >= slots) {
          auto wait = Micros(100000);
          if (pending_units > 0)
            wait = std::clamp(std::chrono::duration_cast<Micros>(pending_since + result_flush_interval - Clock::now()),
                              Micros(0), wait);
          result_ready.wait_for(lock, wait, done);
        } else {
          result_ready.wait_for(lock, backoff.next(Micros(1000)), done);
        }
      }
      // STOP came, so rank 0 has received every message of this rank: these complete at once.
      for (Outgoing& o : sending) MPI_Wait(&o.request, MPI_STATUS_IGNORE);
    } catch (const std::exception& e) {
      abort_job(rank, e.what());
    }
    {
      std::lock_guard lock(mutex);
      closed = true;
    }
    work_ready.notify_all();
    for (auto& t : pool) t.join();
  } catch (const std::exception& e) {
    abort_job(rank, e.what());
  }
}

}  // namespace dobudget::mpi
