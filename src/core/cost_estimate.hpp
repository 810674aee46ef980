// Cost estimate of a study before it runs (`dobudget check`), from a short timed calibration on
// this machine. EM's cost per E-step is proportional to the number of observations a fit sees,
// (episodes) x (H + 1), so one calibration fit per scenario gives seconds per observation-fit:
//   rate = seconds(calibration fit) / observations(calibration fit),
//   unit cost = sum over the unit's distinct fits of [rate x observations(fit) + measure cost],
//   study cost = sum over units + per-draw return_gap references.
// The calibration fit is a regime-aware fit (the costliest strategy: it also carries the decision
// rule) on up to `calibration_episodes` episodes of draw 0 of the scenario, with the scenario's
// fit settings (restarts, tolerance, iteration cap); measure costs are timed once on its result.
// The estimate inherits the calibration fit's number of EM iterations; fits that converge faster
// or slower than it make the estimate high or low (DEVELOPERS.md reports how far off it was).
#pragma once
#include <vector>

#include "core/settings.hpp"

namespace dobudget {

struct ScenarioCost {
  int scenario = 0;
  int units = 0;
  long long fits = 0;                      // distinct model fits in all units
  double seconds_per_observation = 0.0;    // calibration: fit seconds per observation seen
  double measure_seconds_per_fit = 0.0;    // calibration: model_kl and return_gap per fit
  double seconds_per_draw = 0.0;           // calibration: return_gap reference (true plan, V*) per draw
  double calibration_seconds = 0.0;        // time the calibration itself took
  int calibration_starts = 0;              // EM starts the calibration fit ran (fit.hpp)
  bool calibration_confirmed = false;      // a second start reached its best optimum
  double core_seconds = 0.0;               // estimated total for the scenario
};

struct CostEstimate {
  std::vector<ScenarioCost> scenarios;
  double core_seconds = 0.0;
};

CostEstimate estimate_cost(const Study& study, int calibration_episodes = 1000);

}  // namespace dobudget
