#include "core/running/scenario_sizes.hpp"

#include <algorithm>

namespace dobudget {

ScenarioSizes sizes_of(const ScenarioSettings& s) {
  const EnvironmentSettings& e = s.environment;
  return {static_cast<double>(e.given ? e.given->model.states : e.family.states),
          static_cast<double>(e.given ? e.given->model.actions : e.family.actions),
          static_cast<double>(e.given ? e.given->model.observations : e.family.observations),
          static_cast<double>(e.horizon),
          static_cast<double>(s.fit.latent_states),
          static_cast<double>(s.evaluation.trajectories),
          static_cast<double>(s.planner.belief_points),
          static_cast<double>(s.planner.rollouts),
          static_cast<double>(s.planner.exact_histories),
          static_cast<double>(s.pilot_budgets.back()),
          static_cast<double>(s.logged_budgets.back())};
}

bool measured(const ScenarioSettings& s, Measure m) {
  return std::find(s.measures.begin(), s.measures.end(), m) != s.measures.end();
}

}  // namespace dobudget
