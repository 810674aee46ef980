// Measurement (not a test): what resumability costs. `plan` appends every finished unit to
// units.journal and flushes it to the operating system (io/journal.hpp), so that a killed run
// loses only the units still running. This measures
//   1. Journal::append (format + CRC + write + fflush) per unit, for units of realistic size
//      (3 strategies x 3 logged x 6 pilot budgets = 54 rows), against an fsync per unit (what
//      surviving a machine crash as well would cost) and against reading the records back on
//      resume (Journal::parse);
//   2. a whole in-process plan_study of many small units: the time spent inside the per-unit
//      hook (journal append + progress) against the wall time of the run.
// Goal: the bookkeeping stays under 2% of the wall time.
//
// Usage: bench_journal [DIR] [UNITS] [THREADS]
//   DIR      where to write the scratch journals and run directory (default: the system temporary
//            directory); run it on the file system your runs use (NFS, Lustre...) to see theirs
//   UNITS    records appended in part 1 (default 2000)
//   THREADS  threads of the plan_study run in part 2 (default 1)
// Build: cmake --build build --target bench_journal
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <mutex>
#include <string>
#include <vector>

#include "core/running/runner.hpp"
#include "io/atomic_file.hpp"
#include "io/journal.hpp"
#include "io/run_directory.hpp"
#include "io/study_file.hpp"

namespace {

using namespace dobudget;
using Clock = std::chrono::steady_clock;
namespace fs = std::filesystem;

double seconds_since(Clock::time_point t0) { return std::chrono::duration<double>(Clock::now() - t0).count(); }

// One unit's rows with values of the width real runs write (17 significant digits).
std::vector<RunRecord> realistic_rows(int unit) {
  std::vector<RunRecord> rows;
  double x = 0.1234567890123456 + unit * 1e-7;
  for (Strategy st : all_strategies)
    for (int logged : {0, 300, 1000})
      for (int pilot : {10, 20, 50, 100, 300, 1000}) {
        RunRecord r;
        r.scenario = 0;
        r.environment = unit / 10;
        r.replicate = unit % 10;
        r.strategy = st;
        r.logged = logged;
        r.pilot = pilot;
        x = x * 1.6180339887498949 - static_cast<int>(x * 1.6180339887498949);
        r.model_kl = x / 7.0;
        r.return_gap = x / 3.0;
        r.loglik = -12345.678901234567 * (1.0 + x);
        r.iterations = 37 + unit % 50;
        r.converged = true;
        r.fit_seconds = 0.001234567 * (1.0 + x);
        rows.push_back(r);
      }
  return rows;
}

struct Stats {
  double mean = 0, median = 0, p99 = 0, max = 0;
};

Stats stats(std::vector<double> v) {
  Stats s;
  if (v.empty()) return s;
  for (double x : v) s.mean += x;
  s.mean /= static_cast<double>(v.size());
  std::sort(v.begin(), v.end());
  s.median = v[v.size() / 2];
  s.p99 = v[std::min(v.size() - 1, v.size() * 99 / 100)];
  s.max = v.back();
  return s;
}

void print(const char* what, const Stats& s) {
  std::printf("  %-44s mean %8.1f us  median %8.1f us  p99 %8.1f us  max %8.1f us\n", what, 1e6 * s.mean,
              1e6 * s.median, 1e6 * s.p99, 1e6 * s.max);
}

// Two studies of units with 54 rows each (3 strategies x 3 logged x 6 pilot budgets): "small",
// the fit and evaluation settings of the test suite's tiny study (tens of milliseconds per unit),
// and "minimal", fits cut to 5 EM iterations and 10 evaluation histories (about a millisecond per
// unit: far below any useful study, the worst case for the bookkeeping's share).
const char* small_units_study = R"(name: bench-journal-small
seed: 3
environment: { states: 3, actions: 2, observations: 2, horizon: 4, draws: 4,
               dynamics_concentration: 0.2, observation_noise: 0.1 }
logging: { privilege: 1.0, temperature: 0.1 }
budgets: { logged: [0, 30, 60], pilot: [5, 10, 15, 20, 30, 40] }
replicates: 10
fit: { restarts: 2, max_iterations: 40 }
evaluation: { trajectories: 50 }
targets: { model_kl: 0.05 }
)";
const char* minimal_units_study = R"(name: bench-journal-minimal
seed: 3
environment: { states: 2, actions: 2, observations: 2, horizon: 3, draws: 10,
               dynamics_concentration: 0.5, observation_noise: 0.2 }
budgets: { logged: [0, 10, 20], pilot: [2, 3, 4, 5, 6, 8] }
replicates: 20
fit: { restarts: 1, max_iterations: 5 }
evaluation: { trajectories: 10 }
targets: { model_kl: 0.05 }
)";

// Runs a study with plan_study in process, timing the per-unit hook (journal append + progress).
void time_plan(const char* label, const char* yaml, const fs::path& dir, int threads, double fsync_extra) {
  const Study study = io::parse_study(yaml, dir / (std::string(label) + ".yaml"));
  const std::string resolved = io::resolved_yaml(study);
  io::PlanOptions opt;
  opt.out = dir / label;
  opt.threads = threads;
  double hook_s = 0.0;
  std::vector<double> per_unit_hook;
  opt.on_progress = [](const io::Progress&) {};  // as plan's progress callback, minus the printing
  opt.executor = [&](const Study& st, const std::vector<UnitId>& all, const std::vector<std::size_t>& todo, int th,
                     const io::ExecutorHooks& hooks) {
    RunnerHooks timed = hooks;
    timed.on_unit = [&](std::size_t index, std::vector<RunRecord>&& rows) {
      const auto h0 = Clock::now();
      hooks.on_unit(index, std::move(rows));  // journal append + progress (serialised by run_units)
      const double dt = seconds_since(h0);
      hook_s += dt;
      per_unit_hook.push_back(dt);
    };
    run_units(st, all, todo, th, timed);
  };
  const auto t0 = Clock::now();
  const io::PlanOutcome outcome = io::plan_study(study, resolved, opt);
  const double wall = seconds_since(t0);
  const double units = static_cast<double>(std::max<std::size_t>(1, outcome.units_done));
  const Stats h = stats(per_unit_hook);
  std::printf("\npart 2, %s units: plan_study of %zu units (%zu rows each), %d thread(s)\n", label, outcome.units_done,
              outcome.rows.size() / std::max<std::size_t>(1, outcome.units_done), threads);
  std::printf("  wall %.3f s (%.2f ms per unit); inside the per-unit hook %.4f s = %.2f%% of the wall time\n", wall,
              1e3 * wall / units, hook_s, 100.0 * hook_s / wall);
  std::printf("  (hook at its median, without the scheduler's pre-emptions: %.2f%%)\n", 100.0 * h.median * units / wall);
  print("per-unit hook", h);
  std::printf("  with an fsync per unit it would be about %.1f%% of the wall time\n",
              100.0 * (hook_s + fsync_extra * units) / wall);
}

}  // namespace

int main(int argc, char** argv) {
  const fs::path base = argc > 1 ? fs::path(argv[1]) : fs::temp_directory_path();
  const int n = argc > 2 ? std::max(1, std::atoi(argv[2])) : 2000;
  const int threads = argc > 3 ? std::max(1, std::atoi(argv[3])) : 1;
  const fs::path dir = base / ("dobudget-bench-journal-" + std::to_string(::getpid()));
  fs::remove_all(dir);
  fs::create_directories(dir);

  std::vector<std::vector<RunRecord>> units;
  for (int u = 0; u < n; ++u) units.push_back(realistic_rows(u));
  const std::size_t bytes = io::Journal::record(0, units[0]).size();
  std::printf("part 1: %d units of %zu rows (%zu bytes per record) in %s\n", n, units[0].size(), bytes, dir.c_str());

  // Journal::append as plan calls it: format, CRC, fwrite, fflush.
  std::vector<double> append_s;
  {
    io::Journal journal(dir / "append.journal", "0000000000000000");  // a study hash: any 16 hex digits
    for (int u = 0; u < n; ++u) {
      const auto t0 = Clock::now();
      journal.append(static_cast<std::size_t>(u), units[static_cast<std::size_t>(u)]);
      append_s.push_back(seconds_since(t0));
    }
  }
  // The same records with an fsync after each: durable against a machine crash too (fewer of
  // them: each takes milliseconds).
  std::vector<double> fsync_s;
  {
    std::FILE* f = std::fopen((dir / "fsync.journal").c_str(), "ab");
    for (int u = 0; u < std::min(n, 200); ++u) {
      const auto t0 = Clock::now();
      const std::string rec = io::Journal::record(static_cast<std::size_t>(u), units[static_cast<std::size_t>(u)]);
      std::fwrite(rec.data(), 1, rec.size(), f);
      std::fflush(f);
      ::fsync(::fileno(f));
      fsync_s.push_back(seconds_since(t0));
    }
    std::fclose(f);
  }
  // Reading back on resume.
  const std::string text = io::read_file(dir / "append.journal");
  auto t0 = Clock::now();
  std::size_t intact = 0;
  bool torn = false;
  const auto parsed = io::Journal::parse(text, &intact, &torn);
  const double parse_s = seconds_since(t0);
  print("Journal::append (write + fflush)", stats(append_s));
  print("append + fsync (not done by dobudget)", stats(fsync_s));
  std::printf("  %-44s %8.1f us per unit (%zu units, %.1f MB)\n", "Journal::parse on resume", 1e6 * parse_s / n,
              parsed.size(), static_cast<double>(text.size()) / 1e6);

  // Part 2: whole runs of many small units, in process.
  const double fsync_extra = stats(fsync_s).mean - stats(append_s).mean;
  time_plan("small", small_units_study, dir, threads, fsync_extra);
  time_plan("minimal", minimal_units_study, dir, threads, fsync_extra);
  fs::remove_all(dir);
  return 0;
}
