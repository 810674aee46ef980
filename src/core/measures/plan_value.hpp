// The value of a plan executed in the true environment while the agent tracks its belief with the
// model it planned in (the "belief model": the truth itself, or a fitted latent model whose
// number of states may differ). docs/design.md, "return_gap".
//
// Execution of one episode (docs/design.md, "Environments"): s_0 ~ p0, o_0 ~ E(s_0, .) in the truth; the
// agent's belief is b_0 = q0 | o_0 in the belief model. For t = 0..H-1: a_t = choose_action(plan,
// t, b_t); s_{t+1} ~ T[a_t](s_t, .), o_{t+1} ~ E(s_{t+1}, .) in the truth; the agent collects
// gamma^t r(o_{t+1}) (the truth's rewards) and updates b_{t+1} = (b_t qT[a_t]) o qE(:, o_{t+1}),
// normalised, in the belief model. If the belief model gives the observation probability 0 the
// agent keeps its predicted belief b_t qT[a_t] (it has no better guess). The value is the expected
// return sum_{t=1..H} gamma^(t-1) r(o_t) in the truth (horizon and discount of the truth).
//
// Exact value (enumeration of observation branches; the plan is deterministic, so the only
// branching is on observations): a depth-first walk carries the unnormalised true-state
// distribution q(s) = P(s_t = s, o_0..o_t) jointly with the agent's belief; each branch adds
// gamma^t r(o) * sum_s' (q T[a])(s') E(s', o). It is used when the number of reachable histories
// -- observation sequences o_0..o_H of positive probability under the plan -- is at most
// `max_histories` (settings.exact_histories). A cheap lower bound on that number
// (m_0 * m^H, m_0 = #{o_0 : P(o_0) > 0}, m = min over s, a of the number of observations of
// positive probability after (s, a)) rejects large problems at once; otherwise the walk stops as
// soon as it meets more histories than allowed.
//
// Rollouts with common random numbers (CRN): rollout i draws, from the stream
// make_engine(key, Purpose::rollout), the uniforms u_s0, u_o0, then per step t: u_a, u_s, u_o,
// always all of them and in this order, whatever the policy (u_a is used only by the uniform
// policy). Hence rollout i sees the same random numbers under every policy evaluated with the
// same key, and differences between policies have low variance. Discrete draws invert the
// cumulative distribution. Reported: the mean return and its standard error (sample standard
// deviation / sqrt(n)); with `returns`, the per-rollout returns for paired differences.
//
// Uniform policy (actions uniform over A whatever the history): the action is independent of the
// history, so the state marginal is a Markov chain with kernel Tbar = (1/A) sum_a T[a] and the
// value sum_{t=0..H-1} gamma^t (p0 Tbar^(t+1)) . (E r) is exact for any size (linearity of
// expectation); rollouts of the uniform policy (same CRN layout) are provided for checking.
#pragma once
#include <optional>
#include <vector>

#include "core/measures/planner.hpp"
#include "core/world/pomdp.hpp"
#include "core/world/seeding.hpp"
#include "core/running/settings.hpp"
#include "core/running/stop.hpp"

namespace dobudget {

struct PolicyValue {
  double mean = 0.0;
  double standard_error = 0.0;  // 0 when exact
  bool exact = false;
  long long histories = 0;      // exact: reachable histories enumerated; rollouts: episodes
};

// Checks that truth and belief model share actions, observations, and that the plan reads beliefs
// of the belief model's size and covers the truth's horizon; throws std::invalid_argument otherwise.
void check_compatible(const Pomdp& truth, const Pomdp& belief_model, const Plan& plan);

// `stop` (stop.hpp) is polled every 4096 histories of the exact walk and every 16 rollouts.

// Exact value, or nullopt when the plan reaches more than max_histories histories.
std::optional<PolicyValue> exact_plan_value(const Pomdp& truth, const Pomdp& belief_model, const Plan& plan,
                                            long long max_histories, const StopToken& stop = {});

// Mean return over `rollouts` (>= 2) CRN episodes from make_engine(key, Purpose::rollout).
// If `returns` is given it receives the per-rollout returns (resized to `rollouts`).
PolicyValue rollout_plan_value(const Pomdp& truth, const Pomdp& belief_model, const Plan& plan, int rollouts,
                               const StreamKey& key, std::vector<double>* returns = nullptr,
                               const StopToken& stop = {});

// Exact when at most settings.exact_histories histories are reachable, else settings.rollouts rollouts.
PolicyValue plan_value(const Pomdp& truth, const Pomdp& belief_model, const Plan& plan,
                       const PlannerSettings& settings, const StreamKey& key, const StopToken& stop = {});

// Uniform policy: exact value (forward marginals, any size) and CRN rollouts (same layout as above).
double exact_uniform_value(const Pomdp& truth);
PolicyValue rollout_uniform_value(const Pomdp& truth, int rollouts, const StreamKey& key,
                                  std::vector<double>* returns = nullptr);

}  // namespace dobudget
