// Finite-horizon point-based value iteration (PBVI): Pineau, Gordon and Thrun, "Point-based
// value iteration: an anytime algorithm for POMDPs", IJCAI 2003, in its finite-horizon,
// time-indexed form (one alpha-vector set per decision stage).
//
// Conventions (docs/design.md, "Environments"). An episode is o_0, a_0, o_1, ..., a_{H-1}, o_H and its return
// is sum_{t=1..H} gamma^(t-1) r(o_t). The agent decides a_t (t = 0..H-1) from its belief b_t
// after seeing o_t; b_0 = p0 conditioned on o_0. The stage value is the expected discounted sum
// of the rewards still to come, measured from the decision at t:
//
//   V_H(b) = 0,
//   V_t(b) = max_a sum_o P(o | b, a) [ r(o) + gamma * V_{t+1}(b'_{a,o}) ],
//   P(o | b, a) = sum_{s'} (b T[a])(s') E(s', o),   b'_{a,o}(s') = (b T[a])(s') E(s', o) / P(o | b, a),
//
// so that the expected return of an episode is sum_{o_0} P(o_0) V_0(b_0(o_0)).
//
// Representation: stage t holds alpha vectors alpha_k (k = 0..K_t-1) over the model's states,
// each with the action that starts its conditional plan; V_t(b) ~= max_k alpha_k . b. Each alpha
// is the exact value vector (in the planned model) of a conditional plan, so the stored value is
// a lower bound on the model's optimal V_t, equal to it at every belief point whose successors
// are all in the next stage's point set (in particular everywhere on a complete point set).
//
// Point-based backup at a belief point b of stage t, given the next stage's set {alpha_k}:
//   g_{a,o}^k(s) = sum_{s'} T[a](s, s') E(s', o) alpha_k(s'),
//   k*(a, o)     = argmax_k b . g_{a,o}^k                      (ties -> lowest k),
//   alpha_a(s)   = sum_{s'} T[a](s, s') sum_o E(s', o) [ r(o) + gamma alpha_{k*(a,o)}(s') ],
//   backup(b)    = alpha_{a*} with a* = argmax_a b . alpha_a  (ties -> lowest a).
// b . g_{a,o}^k is computed as ((b T[a]) o E(:, o)) . alpha_k, one matrix product per (a, o) over
// all belief points and all k (rows with P(o | b, a) = 0 and states with E(s', o) = 0 skipped, so
// sparse problems such as fully observable ones stay cheap). Duplicate alpha vectors (same
// action, entries equal within 1e-12 relative) are pruned.
//
// Belief points (stage t holds at most settings.belief_points, gathered in the planned model):
//  1. Stage 0: the beliefs p0 | o_0 for every o_0 of positive probability.
//  2. Exhaustive expansion: while the set of all successors b'_{a,o} (P(o | b, a) > 0) of stage t,
//     deduplicated, fits the budget, it is taken whole and stage t+1 is marked complete. When
//     every stage is complete the point set holds every reachable belief (up to the L1
//     deduplication tolerance, 1e-9) and PBVI is exact value iteration on the reachable beliefs.
//  3. Otherwise, from the first stage that does not fit: forward simulation in the planned model,
//     from the stream make_engine(key, Purpose::planner, settings.seed). First trajectories with
//     uniformly random actions fill every incomplete stage up to half the budget; the points are
//     backed up; then trajectories acting greedily on that plan fill up to the budget (topped up
//     by uniform trajectories if greedy ones stop finding new beliefs); the final backup gives
//     the plan. A new point is kept only if its L1 distance to every kept point of its stage
//     exceeds 1e-9. A simulation phase also stops after 200 consecutive trajectories that add no
//     point, or after 10 * target + 1000 trajectories (stages whose reachable beliefs are few or
//     improbable may stay below the budget).
//
// Works on any Pomdp: a true environment (S states) or a fitted latent model (Z values).
// Deterministic given (model, settings, key). Buffers are sized once per backup sweep (the largest
// is points x points doubles); nothing is allocated per point, action or observation inside a
// backup (measured: ~330 allocations for a whole plan at the reference size, 8 states,
// 3 actions, 6 observations, horizon 20, 500 points). Point sets grow amortised.
#pragma once
#include <vector>

#include "core/world/pomdp.hpp"
#include "core/world/seeding.hpp"
#include "core/running/settings.hpp"
#include "core/running/stop.hpp"

namespace dobudget {

struct Plan {
  int horizon = 0;                         // H: stages 0..H-1
  int states = 0;                          // size of the beliefs the plan reads (the planned model's states)
  int actions = 0;
  std::vector<Matrix> alpha;               // alpha[t]: K_t x states, one alpha vector per row
  std::vector<std::vector<int>> action;    // action[t][k]: the action of alpha[t] row k
  std::vector<int> belief_points;          // points backed up at stage t
  std::vector<char> complete;              // stage t's points hold every reachable belief of stage t
};

// Plans in `model` (its horizon, discount and rewards). Throws std::invalid_argument when
// model.horizon < 1, settings.belief_points < 1, or a reward is not finite or H x max |r(o)|
// overflows (every stage value is bounded by it, and an infinite one makes b . alpha = 0 x inf
// NaN). `stop` is polled between stages, actions of a backup, trajectories and expanded points.
Plan plan(const Pomdp& model, const PlannerSettings& settings, const StreamKey& key, const StopToken& stop = {});

// a_t = action of argmax_k alpha_k . b at stage t; among alphas whose value is within
// 1e-12 * (1 + |max|) of the maximum, the lowest action index wins. `belief` has plan.states entries.
// Always a valid action: if no value compares (all NaN, which plan() rules out) it is action 0.
int choose_action(const Plan& plan, int t, const double* belief);

// V_t(b) = max_k alpha_k . b (stage t in 0..H-1; returns 0 for t == H).
double value(const Plan& plan, int t, const double* belief);

// The plan's own estimate of the expected return in `model`: sum_{o_0} P(o_0) V_0(p0 | o_0).
double initial_value(const Plan& plan, const Pomdp& model);

}  // namespace dobudget
