// dobudget plan: simulate a study into a run directory (resumable), print the results and the answer.
// In an MPI build (DOBUDGET_WITH_MPI) under `mpirun -n P` with P > 1, every rank loads the study,
// rank 0 plans and prints as below with the MPI executor, and the other ranks compute the units it
// hands out and print nothing (src/mpi/mpi_executor.hpp). With one rank it is the plain path.
#include <fmt/format.h>
#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <csignal>
#include <cstdio>
#include <exception>
#include <optional>
#include <thread>

#include "cli/commands.hpp"
#include "core/answer.hpp"
#include "core/unit.hpp"
#include "io/answer_table.hpp"
#include "io/run_directory.hpp"
#include "io/study_file.hpp"
#include "io/summary_table.hpp"
#ifdef DOBUDGET_WITH_MPI
#include "mpi/mpi_executor.hpp"
#endif

namespace dobudget::cli {
namespace {

std::atomic<bool> interrupted{false};
extern "C" void on_interrupt(int) { interrupted = true; }

io::Shard parse_shard(const std::string& s) {
  const auto slash = s.find('/');
  try {
    if (slash == std::string::npos) throw std::invalid_argument("");
    std::size_t p1 = 0, p2 = 0;
    const int k = std::stoi(s.substr(0, slash), &p1), n = std::stoi(s.substr(slash + 1), &p2);
    if (p1 != slash || p2 != s.size() - slash - 1 || n < 1 || k < 0 || k >= n) throw std::invalid_argument("");
    return {k, n};
  } catch (const std::logic_error&) {
    throw BadInput("--shard " + s + ": expected K/N with 0 <= K < N, e.g. --shard 0/4");
  }
}

int default_threads() { return static_cast<int>(std::max(1u, std::thread::hardware_concurrency())); }

std::string progress_line(const io::Progress& p) {
  const double rate = p.computed > 0 ? p.elapsed_seconds / static_cast<double>(p.computed) : 0.0;
  const double eta = rate * static_cast<double>(p.total - p.done);
  return fmt::format("units {}/{} ({:.0f}%), {:.0f} s elapsed, about {:.0f} s left", p.done, p.total,
                     100.0 * static_cast<double>(p.done) / static_cast<double>(std::max<std::size_t>(1, p.total)),
                     p.elapsed_seconds, eta);
}

// Where and how to plan: run directory, threads (default_thread_count when --threads is not
// given), shard, progress messages and interruption. Throws BadInput for a malformed --shard.
io::PlanOptions plan_options(const PlanArgs& args, const Study& study, int default_thread_count) {
  io::PlanOptions opt;
  opt.out = args.out.empty() ? std::filesystem::path("runs") / study.name : std::filesystem::path(args.out);
  opt.threads = args.threads > 0 ? args.threads : default_thread_count;
  if (!args.shard.empty()) opt.shard = parse_shard(args.shard);
  const bool tty = ::isatty(::fileno(stderr)) != 0;
  opt.on_progress = [quiet = args.quiet, tty, last = -1.0](const io::Progress& p) mutable {
    if (quiet) return;
    if (tty) {
      std::fprintf(stderr, "\r%s   ", progress_line(p).c_str());
    } else if (p.elapsed_seconds - last >= 10.0 || p.done == p.total) {
      std::fprintf(stderr, "%s\n", progress_line(p).c_str());
      last = p.elapsed_seconds;
    }
  };
  opt.stop_requested = [] { return interrupted.load(); };
  return opt;
}

void catch_interruptions() {
  std::signal(SIGINT, on_interrupt);
  std::signal(SIGTERM, on_interrupt);
}

// Plans (with opt.executor when set), writes the run directory and prints the results and the
// answer. `ranks`: the MPI ranks taking part (1 without MPI).
int plan_and_report(const Study& study, const std::string& resolved, const io::PlanOptions& opt, bool quiet,
                    int ranks) {
  const bool tty = ::isatty(::fileno(stderr)) != 0;
  if (!quiet)
    std::fprintf(stderr, "dobudget plan: study '%s', %zu scenario(s), %zu units, %s, writing %s\n",
                 study.name.c_str(), study.scenarios.size(), enumerate_units(study).size(),
                 (ranks == 1 ? fmt::format("{} thread(s)", opt.threads)
                             : fmt::format("{} MPI ranks x {} thread(s)", ranks, opt.threads))
                     .c_str(),
                 opt.out.string().c_str());
  const io::PlanOutcome outcome = io::plan_study(study, resolved, opt);
  if (tty && !quiet) std::fprintf(stderr, "\n");
  io::write_manifest(opt.out, study, resolved, opt, outcome);
  if (outcome.torn_record_dropped)
    std::fprintf(stderr, "note: the last record of units.journal was torn by an interruption; that unit was computed again\n");
  if (!outcome.complete) {
    std::fprintf(stderr,
                 "stopped: %zu of %zu units are finished and recorded in %s/units.journal.\n"
                 "Run the same command again to compute only the missing units.\n",
                 outcome.units_done, outcome.units_total, opt.out.string().c_str());
    return 130;
  }
  if (opt.shard && opt.shard->count > 1) {
    std::printf("shard %d/%d: %zu units done in %.1f s (%zu resumed); combine the shards with `dobudget merge`\n",
                opt.shard->index, opt.shard->count, outcome.units_done, outcome.seconds, outcome.units_resumed);
    return 0;
  }
  std::printf("%s", io::format_summary(study, outcome.rows).c_str());
  const auto answers = compute_study_answers(study, outcome.rows);
  io::write_answer_files(opt.out, study, answers);
  std::printf("\n%s", io::format_answer_table(answers, &study).c_str());
  std::printf("\nrun directory: %s (runs.csv, answer.csv, answer.md, manifest.json); %zu units in %.1f s%s\n",
              opt.out.string().c_str(), outcome.units_done, outcome.seconds,
              outcome.units_resumed ? fmt::format(" ({} resumed)", outcome.units_resumed).c_str() : "");
  std::printf("\n%s\n", caution);
  return 0;
}

#ifdef DOBUDGET_WITH_MPI
// mpirun -n P, P > 1. Every rank loads the study and agrees that all could before any work starts
// (a bad study is reported once, by rank 0, with exit code 2 on every rank; a rank that alone
// fails reports its own error). Then rank 0 plans with the MPI executor, the others serve it.
int plan_on_ranks(const PlanArgs& args, const mpi::Session& session) {
  std::optional<Study> study;
  std::string resolved;
  io::PlanOptions opt;
  std::exception_ptr error;
  try {
    study = io::load_study(args.study);
    resolved = io::resolved_yaml(*study);
    // --threads is per rank; by default the ranks on a node share its cores.
    opt = plan_options(args, *study, std::max(1, default_threads() / session.ranks_on_this_node()));
  } catch (...) {
    error = std::current_exception();
  }
  const mpi::Session::Agreement agreed = session.agree(!error);
  // mpirun and schedulers signal every rank: rank 0 then stops handing out units and collects the
  // ones in flight, which the other ranks finish instead of dying with them.
  catch_interruptions();
  if (session.rank() == 0) {
    if (error) std::rethrow_exception(error);  // reported by main, exactly as without MPI
    if (!agreed.all_ok) throw std::runtime_error("another MPI rank could not load the study (its error is shown above)");
    mpi::Coordinator coordinator(session);
    opt.executor = [&coordinator](const Study& s, const std::vector<UnitId>& units, const std::vector<std::size_t>& todo,
                                  int threads, const RunnerHooks& hooks) { coordinator(s, units, todo, threads, hooks); };
    try {
      const int code = plan_and_report(*study, resolved, opt, args.quiet, session.size());
      coordinator.release_workers();
      if (!args.quiet)
        std::fprintf(stderr, "units computed by MPI ranks 0..%d: %s\n", session.size() - 1,
                     fmt::format("{}", fmt::join(coordinator.units_by_rank(), " ")).c_str());
      return code;
    } catch (...) {
      coordinator.release_workers();  // e.g. a directory of another study: no unit was handed out
      throw;
    }
  }
  if (error) {
    if (agreed.root_ok) {
      try {
        std::rethrow_exception(error);
      } catch (const std::exception& e) {
        std::fprintf(stderr, "error (MPI rank %d): %s\n", session.rank(), e.what());
      }
    }
    return 2;
  }
  if (!agreed.all_ok) return 2;
  mpi::serve_as_worker(*study, opt.threads);
  return 0;
}
#endif

}  // namespace

int plan_command(const PlanArgs& args) {
#ifdef DOBUDGET_WITH_MPI
  const mpi::Session session;  // MPI_Init_thread here, MPI_Finalize on the way out
  if (session.size() > 1) return plan_on_ranks(args, session);
#endif
  const Study study = io::load_study(args.study);
  const std::string resolved = io::resolved_yaml(study);
  const io::PlanOptions opt = plan_options(args, study, default_threads());
  catch_interruptions();
  return plan_and_report(study, resolved, opt, args.quiet, 1);
}

}  // namespace dobudget::cli
