// dobudget check: validate a study, print it resolved, count units and fits, estimate the memory
// and the cost. A study whose estimated peak memory exceeds this machine's is refused (exit 2,
// the keys that drive it named), before anything is calibrated.
#include <fmt/format.h>

#include <algorithm>
#include <cstdio>
#include <thread>

#include "cli/commands.hpp"
#include "core/running/cost_estimate.hpp"
#include "core/running/memory_estimate.hpp"
#include "core/running/unit.hpp"
#include "io/machine_memory.hpp"
#include "io/memory_messages.hpp"
#include "io/records_study.hpp"
#include "io/study_file.hpp"

namespace dobudget::cli {
namespace {

// The calibration runs one fit per scenario; skipped when its own cost bound is above this.
constexpr double max_calibration_seconds = 60.0;

}  // namespace

int check_command(const std::string& study_file) {
  Study study = io::load_study(study_file);
  io::prepare_records(study);  // worlds from records (issue 9): the fit runs here, before anything is estimated
  const int threads = static_cast<int>(std::max(1u, std::thread::hardware_concurrency()));
  const MemoryEstimate memory = estimate_memory(study, threads);
  io::refuse_memory_beyond(memory, io::machine_memory(), study_file);

  std::printf("%s", io::resolved_yaml(study).c_str());
  const std::vector<UnitId> units = enumerate_units(study);
  long long fits = 0;
  for (const auto& u : units)
    fits += fits_per_unit(study.scenarios[static_cast<std::size_t>(u.scenario)].settings);
  std::printf("# valid study: %zu scenario(s), %zu units, %lld model fits\n", study.scenarios.size(), units.size(), fits);
  std::printf("# estimated peak memory: %s with %d unit(s) at once (one unit of scenario %d: %s;", 
              io::format_bytes(memory.peak_bytes).c_str(), memory.concurrent_units, memory.scenario,
              io::format_bytes(memory.unit_bytes).c_str());
  for (const MemoryPart& p : memory.unit_parts)
    std::printf(" %s %s,", io::memory_part_name(p.id).c_str(), io::format_bytes(p.bytes).c_str());
  std::printf(" %s %s)\n", io::memory_part_name(memory.results.id).c_str(), io::format_bytes(memory.results.bytes).c_str());
  const CostBound bound = bound_cost(study, units);
  std::printf("# cost from counts (what `plan` states and limits): about %.3g core-hours, at most %.3g\n",
              bound.core_seconds / 3600.0, bound.max_core_seconds / 3600.0);
  if (study.precision) {
    // Range mode (precision_search.hpp): the figures above are round 1's, the coarse grid.
    const ScenarioSettings& s = study.scenarios.front().settings;
    std::printf("# range mode: round 1 simulates pilot budgets [%s]; later rounds add budgets, draws or replicates "
                "until every answer is within +-%g%% or the next round would pass precision.max_core_hours: the whole "
                "run costs from about %.3g to %.4g core-hours (from counts; --max-core-hours also caps it)\n",
                fmt::format("{}", fmt::join(s.pilot_budgets, ", ")).c_str(), 100.0 * study.precision->relative,
                bound.core_seconds / 3600.0, std::max(bound.core_seconds / 3600.0, study.precision->max_core_hours));
  }

  double calibration = 0.0;  // bound on the calibration's own time
  for (const Scenario& sc : study.scenarios) calibration += bound_fit_cost(sc.settings, 1000.0).core_seconds;
  if (calibration > max_calibration_seconds) {
    std::printf("# calibration skipped: its fits alone would take about %.0f s (more than %.0f s)\n", calibration,
                max_calibration_seconds);
    return 0;
  }
  std::fprintf(stderr, "calibrating on this machine (one fit per scenario)...\n");
  const CostEstimate cost = estimate_cost(study);
  int unconfirmed = 0;
  for (const auto& c : cost.scenarios) {
    std::printf("# scenario %d: %d units, %lld fits, calibration %.2g s per 1000 observations fitted, %.2g s of measures per fit: about %.3g core-hours\n",
                c.scenario, c.units, c.fits, 1000.0 * c.seconds_per_observation, c.measure_seconds_per_fit,
                c.core_seconds / 3600.0);
    std::printf("# scenario %d: calibration fit ran %d EM starts; its best optimum was %s\n", c.scenario,
                c.calibration_starts, c.calibration_confirmed ? "confirmed by a second start" : "NOT confirmed by a second start");
    unconfirmed += c.calibration_confirmed ? 0 : 1;
  }
  std::printf("# calibration fits whose best optimum was not confirmed: %d of %zu (%.0f%%)%s\n", unconfirmed,
              cost.scenarios.size(), 100.0 * unconfirmed / static_cast<double>(std::max<std::size_t>(1, cost.scenarios.size())),
              unconfirmed > 0 ? "; consider a larger fit.max_restarts" : "");
  std::printf("# estimated cost: %.3g core-hours (%.0f core-seconds); wall time is about this divided by the cores used\n",
              cost.core_seconds / 3600.0, cost.core_seconds);
  std::printf("# (from one timed calibration fit per scenario on this machine; see DEVELOPERS.md for its accuracy)\n");
  return 0;
}

}  // namespace dobudget::cli
