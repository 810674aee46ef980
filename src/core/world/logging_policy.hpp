// The privileged decision-maker of the logged regime (docs/design.md, "Logged regime"):
//   pi_log(a | s) = privilege * softmax(Q(s, .) / temperature) + (1 - privilege) / |A|,
// with Q the optimal action value of the fully observed problem, where the reward of moving to
// s' is the expected observation reward R(s') = sum_o E(s', o) r(o):
//   Q(s, a) = sum_s' T[a](s, s') [R(s') + q_discount * max_a' Q(s', a')]
// (Bellman optimality equation; Sutton and Barto, Reinforcement Learning, 2nd ed., 2018, eq. 3.20),
// solved by value iteration to a fixed point (tolerance 1e-12).
#pragma once
#include "core/world/pomdp.hpp"
#include "core/running/settings.hpp"

namespace dobudget {

Matrix optimal_state_action_values(const Pomdp& m, double q_discount);
Matrix privileged_logging_policy(const Pomdp& m, const LoggingSettings& logging);

}  // namespace dobudget
