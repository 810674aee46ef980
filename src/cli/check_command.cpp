// dobudget check: validate a study, print it resolved, count units and fits, estimate the cost.
#include <algorithm>
#include <cstdio>

#include "cli/commands.hpp"
#include "core/cost_estimate.hpp"
#include "core/unit.hpp"
#include "io/study_file.hpp"

namespace dobudget::cli {

int check_command(const std::string& study_file) {
  const Study study = io::load_study(study_file);
  std::printf("%s", io::resolved_yaml(study).c_str());
  std::size_t units = 0, fits = 0;
  for (const auto& u : enumerate_units(study)) {
    ++units;
    fits += static_cast<std::size_t>(fits_per_unit(study.scenarios[static_cast<std::size_t>(u.scenario)].settings));
  }
  std::printf("# valid study: %zu scenario(s), %zu units, %zu model fits\n", study.scenarios.size(), units, fits);
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
