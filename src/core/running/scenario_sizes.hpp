// The sizes a scenario's estimates (memory_estimate.hpp, cost_estimate.hpp) are computed from,
// as doubles so that no product of them overflows: the environment's sizes come from the given
// model when there is one, else from the synthetic family.
#pragma once
#include "core/running/settings.hpp"

namespace dobudget {

struct ScenarioSizes {
  double S, A, O;  // states, actions, observations of the environment
  double H;        // horizon
  double Z;        // fit.latent_states
  double T;        // evaluation.trajectories
  double N, R, X;  // planner.belief_points, planner.rollouts, planner.exact_histories
  double P, L;     // the largest pilot and logged budgets
};

ScenarioSizes sizes_of(const ScenarioSettings& s);

// Whether the scenario measures `m`.
bool measured(const ScenarioSettings& s, Measure m);

}  // namespace dobudget
