// dobudget plan: simulate a study into a run directory (resumable), print the results and the answer.
// In an MPI build (DOBUDGET_WITH_MPI) under `mpirun -n P` with P > 1, every rank loads the study,
// rank 0 plans and prints as below with the MPI executor, and the other ranks compute the units it
// hands out and print nothing (src/mpi/mpi_executor.hpp). With one rank it is the plain path.
#include <fmt/format.h>
#include <unistd.h>

#include <algorithm>
#include <numeric>
#include <cmath>
#include <atomic>
#include <csignal>
#include <cstdio>
#include <exception>
#include <filesystem>
#include <optional>
#include <thread>

#include "cli/commands.hpp"
#include "cli/option_values.hpp"
#include "core/answer/answer.hpp"
#include "core/running/cost_estimate.hpp"
#include "core/running/memory_estimate.hpp"
#include "core/running/unit.hpp"
#include "io/answer_table.hpp"
#include "io/pilot_choice_table.hpp"
#include "io/file_name.hpp"
#include "io/machine_memory.hpp"
#include "io/memory_messages.hpp"
#include "io/records_study.hpp"
#include "io/precision_run.hpp"
#include "io/run_directory.hpp"
#include "io/study_file.hpp"
#include "io/summary_table.hpp"
#include "io/text_escape.hpp"
#ifdef DOBUDGET_WITH_MPI
#include "mpi/mpi_executor.hpp"
#endif

namespace dobudget::cli {
namespace {

// Progress of the records' fit (records_study.hpp), on stderr like the other progress messages.
void records_progress(const std::string& line) { std::fprintf(stderr, "%s\n", line.c_str()); }


std::atomic<bool> interrupted{false};
extern "C" void on_interrupt(int) { interrupted = true; }

// The most threads a process may ask for; more is a typing mistake (the cores are far fewer).
constexpr long long max_threads = 1024;
// The most shards a study may be split into (job arrays of schedulers stop well below this).
constexpr long long max_shards = 1000000;

io::Shard parse_shard(const std::string& s) {
  const auto slash = s.find('/');
  const std::string expected = "--shard " + s + ": expected K/N with 0 <= K < N, e.g. --shard 0/4";
  if (slash == std::string::npos) throw BadInput(expected);
  try {
    const long long n = whole_option("--shard N", std::string_view(s).substr(slash + 1), 1, max_shards);
    const long long k = whole_option("--shard K", std::string_view(s).substr(0, slash), 0, n - 1);
    return {static_cast<int>(k), static_cast<int>(n)};
  } catch (const BadInput&) {
    throw BadInput(expected + fmt::format(" (N at most {})", max_shards));
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
  opt.out = args.out.empty() ? std::filesystem::path("runs") / io::safe_file_name(study.name)
                             : std::filesystem::path(args.out);
  opt.threads = args.threads.empty() ? default_thread_count
                                     : static_cast<int>(whole_option("--threads", args.threads, 1, max_threads));
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

// What a run may spend unless --max-core-hours raises it: 1000 core-hours (a day on 42 cores),
// well above every worked study (the largest, studies/cluster, is estimated at about 2) and far
// below the runaway studies a mistyped budget or sweep makes (millions of core-hours).
constexpr double default_max_core_hours = 1000.0;

// The limit of --max-core-hours (default_max_core_hours when not given).
double core_hour_limit(const PlanArgs& args) {
  if (args.max_core_hours.empty()) return default_max_core_hours;
  const double limit = number_option("--max-core-hours", args.max_core_hours);
  if (!(limit > 0.0))
    throw BadInput("--max-core-hours: expected a number of core-hours greater than 0, got '" + args.max_core_hours + "'");
  return limit;
}

// States the estimated cost of the units `todo` (indices into `units`) on stderr (when `print`),
// and refuses (exit 2) a run whose bound, every start of every fit running to fit.max_iterations
// (cost_estimate.hpp), is above `limit`: the typical estimate alone could be passed by a study
// that cannot converge (a tolerance of 1e-300 with a huge iteration cap). `resumed`: units of
// this run already in the journal.
void check_cost(const Study& study, const std::vector<UnitId>& all, const std::vector<std::size_t>& todo,
                std::size_t resumed, double limit, bool print) {
  std::vector<UnitId> units;
  for (std::size_t i : todo) units.push_back(all[i]);
  const CostBound cost = bound_cost(study, units);
  const double hours = cost.core_seconds / 3600.0, most = cost.max_core_seconds / 3600.0;
  if (most > limit)
    throw BadInput(fmt::format("--max-core-hours: the estimated cost of this run, about {:.2g} core-hours, could reach "
                               "{:.2g} core-hours (if every start of every fit runs to fit.max_iterations), which is "
                               "above the limit of {:.4g} core-hours; check the study (`dobudget check` shows what "
                               "drives it), or raise the limit, e.g. --max-core-hours {:.2g}",
                               hours, most, limit, most * 1.1));
  if (print)
    std::fprintf(stderr, "estimated cost: about %.2g core-hours (at most %.2g) for %zu units%s; limit %.4g (--max-core-hours)\n",
                 hours, most, units.size(),
                 resumed ? fmt::format(" still to do ({} finished before)", resumed).c_str() : "", limit);
}

// Before anything is written: refuses (exit 2) a run whose estimated peak memory is above what
// this process may use (memory_estimate.hpp, machine_memory.hpp); for a new (or empty) run
// directory, states and limits the cost of every unit of the run (check_cost). For a directory
// being resumed the cost is that of the units still to do, known once the journal is read: it is
// stated and limited then, through opt.before_computing, before any unit is computed.
void check_what_it_takes(const PlanArgs& args, const Study& study, io::PlanOptions& opt, bool print) {
  const double limit = core_hour_limit(args);
  io::refuse_memory_beyond(estimate_memory(study, opt.threads), io::machine_memory(), args.study);
  if (!std::filesystem::exists(opt.out / "study.resolved.yaml")) {
    const std::vector<UnitId> all = enumerate_units(study);
    check_cost(study, all, io::shard_units(all.size(), opt.shard.value_or(io::Shard{})), 0, limit, print);
    return;
  }
  opt.before_computing = [&study, limit, print, shard = opt.shard.value_or(io::Shard{})](
                             const std::vector<UnitId>& all, const std::vector<std::size_t>& todo) {
    check_cost(study, all, todo, io::shard_units(all.size(), shard).size() - todo.size(), limit, print);
  };
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
                 io::printable_line(study.name).c_str(), study.scenarios.size(), enumerate_units(study).size(),
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
  std::printf("%s", io::format_pilot_choice_table(choose_pilot_policies(study, answers)).c_str());
  std::printf("\nrun directory: %s (runs.csv, answer.csv, answer.md, manifest.json); %zu units in %.1f s%s\n",
              opt.out.string().c_str(), outcome.units_done, outcome.seconds,
              outcome.units_resumed ? fmt::format(" ({} resumed)", outcome.units_resumed).c_str() : "");
  std::printf("\n%s\n", caution);
  return 0;
}

// Range mode (budgets.pilot: { from, to } and `precision`; precision_run.hpp): refuses shards
// (each round depends on the answers of the one before, so no shard can choose its own), and a
// cap below the first round's estimated cost.
void check_range_mode(const PlanArgs& args, const Study& study, const io::PlanOptions& opt) {
  if (opt.shard && opt.shard->count > 1)
    throw BadInput("--shard: this study has `precision` (budgets.pilot as a range: the range mode), which runs in "
                   "rounds, each chosen from the answers of the round before, so it cannot be split into shards; run "
                   "it in one process (--threads), or give budgets.pilot as a list to use shards");
  const double cap = std::min(study.precision->max_core_hours, core_hour_limit(args));
  const double first = io::first_round_core_seconds(study) / 3600.0;
  if (first > cap)
    throw BadInput(fmt::format("precision.max_core_hours: the first round alone (the coarse grid of budgets.pilot) is "
                               "estimated at about {:.2g} core-hours, above the cap of {:.4g} core-hours; raise "
                               "precision.max_core_hours (and --max-core-hours), or use fewer draws or replicates",
                               first, cap));
}

// Runs a range-mode study in rounds and prints the last round's results and answer, and which
// answers met the precision and why.
int plan_range_and_report(const PlanArgs& args, const Study& study, const std::string& resolved,
                          const io::PlanOptions& opt) {
  const bool tty = ::isatty(::fileno(stderr)) != 0;
  const double cap = std::min(study.precision->max_core_hours, core_hour_limit(args));
  if (!args.quiet)
    std::fprintf(stderr,
                 "dobudget plan: study '%s' in range mode: pilot budgets from %d to %d, precision +-%g%%, at most %.4g "
                 "core-hours; %d thread(s), writing %s\n",
                 io::printable_line(study.name).c_str(), study.scenarios.front().settings.pilot_range->from,
                 study.scenarios.front().settings.pilot_range->to, 100.0 * study.precision->relative, cap, opt.threads,
                 opt.out.string().c_str());
  const auto on_round = [&](const io::RoundSummary& r) {
    if (args.quiet) return;
    if (tty) std::fprintf(stderr, "\n");
    std::fprintf(stderr, "round %d: added pilot budgets [%s], draws x%d, replicates x%d: %zu units, %lld fits, about %.2g core-hours%s\n",
                 r.round, fmt::format("{}", fmt::join(r.added, ", ")).c_str(), r.draws_scale, r.replicates_scale, r.units,
                 r.fits, r.estimated_core_seconds / 3600.0,
                 r.units_resumed ? fmt::format(" ({} units resumed)", r.units_resumed).c_str() : "");
  };
  const io::PrecisionOutcome outcome = io::plan_precision_study(study, resolved, opt, cap, on_round);
  if (tty && !args.quiet) std::fprintf(stderr, "\n");
  if (!outcome.complete) {
    std::fprintf(stderr,
                 "stopped: %zu of %zu units of round %zu are finished and recorded in %s/units.journal.\n"
                 "Run the same command again to go on from there.\n",
                 outcome.units_done, outcome.units_total, outcome.rounds.size(), outcome.round_dir.string().c_str());
    return 130;
  }
  std::printf("%s", io::format_summary(outcome.final_study, outcome.rows).c_str());
  std::printf("\n%s", io::format_answer_table(outcome.answers, &outcome.final_study).c_str());
  std::printf("\nprecision (+-%g%% of the need, half-width over value): %s\n", 100.0 * study.precision->relative,
              outcome.stopped_because.c_str());
  for (const PrecisionVerdict& v : outcome.verdicts) {
    const AnswerRow& r = v.row;
    std::printf("  %s%s %s, logged %d: %s [%s, %s], +-%s: %s\n",
                study.scenarios.size() > 1 ? fmt::format("scenario {}, ", r.scenario).c_str() : "",
                std::string(name(r.measure)).c_str(), std::string(name(r.strategy)).c_str(), r.logged,
                fmt::format("{:.4g}", r.needed_pilot).c_str(), fmt::format("{:.4g}", r.low).c_str(),
                fmt::format("{:.4g}", r.high).c_str(),
                std::isinf(v.half_width) ? "inf" : fmt::format("{:.1f}%", 100.0 * v.half_width).c_str(),
                v.met ? "met" : ("not met: " + v.why).c_str());
  }
  long long fits = 0;
  double estimated = 0.0;
  for (const auto& r : outcome.rounds) {
    fits += r.fits;
    estimated += r.estimated_core_seconds;
  }
  std::printf("\nrun directory: %s (runs.csv, answer.csv, answer.md, precision.csv, manifest.json, round-1..%zu); "
              "%zu rounds, %lld fits computed (about %.2g core-hours estimated), %.1f s\n",
              opt.out.string().c_str(), outcome.rounds.size(), outcome.rounds.size(), fits, estimated / 3600.0,
              outcome.seconds);
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
    io::prepare_records(*study);  // every rank fits the records alike (deterministic: records_study.hpp)
    resolved = io::resolved_yaml(*study);
    // --threads is per rank; by default the ranks on a node share its cores.
    opt = plan_options(args, *study, std::max(1, default_threads() / session.ranks_on_this_node()));
    if (study->precision)
      throw BadInput("precision: a range-mode study runs in rounds, each chosen from the answers of the round "
                     "before; it is not run on MPI ranks (yet): run it with one process (--threads), or give "
                     "budgets.pilot as a list");
    check_what_it_takes(args, *study, opt, session.rank() == 0 && !args.quiet);
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
                                  int threads, const io::ExecutorHooks& hooks) { coordinator(s, units, todo, threads, hooks); };
    try {
      const int code = plan_and_report(*study, resolved, opt, args.quiet, session.size());
      coordinator.release_workers();
      if (!args.quiet) {
        std::fprintf(stderr, "units computed by MPI ranks 0..%d: %s\n", session.size() - 1,
                     fmt::format("{}", fmt::join(coordinator.units_by_rank(), " ")).c_str());
        const auto& by_rank = coordinator.units_by_rank();
        const std::size_t remote = std::accumulate(by_rank.begin() + 1, by_rank.end(), std::size_t{0});
        const double cpu = coordinator.serving_cpu_seconds();
        const double busy = coordinator.handling_cpu_seconds();
        std::fprintf(stderr,
                     "MPI hand-out: %zu units to ranks 1..%d in %zu batches, back in %zu messages; rank 0's main "
                     "thread used %.3f s of CPU serving them, %.3f s of it on messages (%.0f units per CPU second)\n",
                     remote, session.size() - 1, coordinator.batches(), coordinator.result_messages(), cpu, busy,
                     busy > 0 ? static_cast<double>(remote) / busy : 0.0);
      }
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
  mpi::serve_as_worker(*study, opt.threads, opt.stop_requested);
  return 0;
}
#endif

}  // namespace

int plan_command(const PlanArgs& args) {
#ifdef DOBUDGET_WITH_MPI
  const mpi::Session session;  // MPI_Init_thread here, MPI_Finalize on the way out
  if (session.size() > 1) return plan_on_ranks(args, session);
#endif
  Study study = io::load_study(args.study);
  io::prepare_records(study, {}, args.quiet ? nullptr : records_progress);  // worlds from records (issue 9)
  const std::string resolved = io::resolved_yaml(study);
  io::PlanOptions opt = plan_options(args, study, default_threads());
  if (study.precision) check_range_mode(args, study, opt);
  check_what_it_takes(args, study, opt, !args.quiet);
  catch_interruptions();
  if (study.precision) return plan_range_and_report(args, study, resolved, opt);
  return plan_and_report(study, resolved, opt, args.quiet, 1);
}

}  // namespace dobudget::cli
