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
//
// For `plan`, which must say what it is about to spend before it starts, bound_cost() gives a
// cheap deterministic estimate from counts alone (no calibration), at rates measured once on the
// project's 2-core machine (cost_estimate.cpp names them and the commands that measured them).
// Per distinct fit of n pilot + L logged episodes (obs = (n + L)(H + 1) observations), per E-step:
//   em = obs x (em_per_observation + em_per_observation_z2 x Z^2) + A O Z^2 x op_seconds,
// times restarts x E-steps, with E-steps = min(fit.max_iterations, typical_iterations) for the
// estimate and fit.max_iterations for the bound; per fit, for the measures measured:
//   model_kl   = T (H + 1)(Z^2 + Z O + Z) x kl_seconds,
//   return_gap = 2 H A N (Z^2 + Z O + O N Z) x op_seconds
//                + (exact_histories + R H) x [step_seconds + (N Z + Z^2 + S^2) x op_seconds],
// (a plan: two backups of N points per stage against at most N alphas; its evaluation: the exact
// walk, then rollouts if the walk meets too many histories, each step choosing among at most N
// alphas); per unit R H such steps of the true plan's rollouts; per environment draw the same
// return_gap terms with S for Z (the true plan and V*). Every count is a double: no overflow.
#pragma once
#include <vector>

#include "core/running/settings.hpp"
#include "core/running/unit.hpp"

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

struct CostBound {
  double core_seconds = 0.0;      // the estimate (typical numbers of EM iterations)
  double max_core_seconds = 0.0;  // every start of every fit runs to fit.max_iterations
};

// The cost of running `units` (all of them, or one shard's) of `study`; see above. Draws are
// counted once for every (scenario, draw) that has a unit in `units`.
CostBound bound_cost(const Study& study, const std::vector<UnitId>& units);

// Cost bound of one fit of `episodes` episodes with the scenario's settings (calibration and tests).
CostBound bound_fit_cost(const ScenarioSettings& s, double episodes);

// Observations (episodes x (H + 1)) seen by all distinct fits of one unit of `s`, in closed form
// (fits whose data coincide are shared, as fits_per_unit counts them).
double observations_per_unit(const ScenarioSettings& s);

}  // namespace dobudget
