// The return_gap measure (docs/design.md, "return_gap"):
//
//   gap = (V* - V(pi_hat)) / (V* - V_uniform)
//
// pi_hat: the plan made by point-based value iteration (planner.hpp) in the fitted model,
//         executed in the true environment while the agent tracks its belief with the fitted model;
// V*:     the value of the plan made the same way in the true model (tracking with the truth);
// V_uniform: the value of the uniform random policy (exact, plan_value.hpp).
// 0 means planning with the fitted model loses nothing against planning with the truth, 1 means it
// is no better than acting at random. Values are exact when the plans reach at most
// settings.exact_histories histories, otherwise CRN rollouts (plan_value.hpp).
//
// The gap is NOT clamped: it can be slightly negative, because PBVI is approximate (a plan made in
// a wrong model may happen to beat the approximate plan made in the truth), or from rollout noise;
// it can exceed 1 when the fitted plan is worse than random.
//
// "No room for planning": when V* - V_uniform < max(1e-6 (1 + |V*|), 2 SE(V*)) (SE(V*) = 0 when
// exact; V_uniform is always exact) the ratio is meaningless and no gap is reported. The
// decision is made once per environment draw, in the reference, so that every replicate, strategy
// and budget of that draw agree.
//
// Streams. prepare_return_gap plans in the truth with the planner stream of (key with replicate 0)
// and, if needed, estimates V* by rollouts from that key's rollout stream. return_gap plans in the
// fitted model with the planner stream of replicate_key. When every value is exact:
//   gap = (V*_ref - V(pi_hat)) / (V*_ref - V_uniform).
// Otherwise V* and V(pi_hat) are both re-estimated by rollouts from the replicate's rollout stream
// (common random numbers, shared by every strategy and budget of the replicate), the numerator is
// the mean of the paired per-rollout differences, with its standard error, and the denominator is
// the reference's V*_ref - V_uniform (the same for every replicate of the draw):
//   gap = mean_i (R*_i - R_hat_i) / (V*_ref - V_uniform),  gap_se = SE(R* - R_hat) / (V*_ref - V_uniform).
#pragma once
#include <optional>
#include <string>

#include "core/measures/planner.hpp"
#include "core/world/pomdp.hpp"
#include "core/world/seeding.hpp"
#include "core/running/settings.hpp"
#include "core/running/stop.hpp"

namespace dobudget {

struct ReturnGapReference {
  Plan true_plan;             // planned in the truth, planner stream of (key, replicate 0)
  double v_star = 0.0;        // value of true_plan executed in the truth, tracking with the truth
  double v_star_se = 0.0;     // its standard error (0 when exact)
  bool v_star_exact = false;
  double v_uniform = 0.0;     // exact value of the uniform policy
  bool room = false;          // V* - V_uniform is large enough to normalise by
  std::string note;           // "no room for planning" when !room
};

// Computed once per environment draw and reused by every replicate (key.replicate is ignored:
// replicate 0 is used). `stop` (stop.hpp) is passed to the planner and the evaluations here and below.
ReturnGapReference prepare_return_gap(const Pomdp& truth, const PlannerSettings& settings, const StreamKey& key,
                                      const StopToken& stop = {});

struct ReturnGapResult {
  std::optional<double> gap;  // empty when there is no room for planning
  double value = 0.0;         // V(pi_hat) (exact, or rollout mean); NaN when no room (not computed)
  double value_se = 0.0;      // 0 when exact
  double v_star = 0.0;        // V* used in the numerator (reference, or the replicate's rollout estimate)
  double gap_se = 0.0;        // standard error of the gap from paired rollouts (0 when exact)
  bool exact = false;
  std::string note;           // "no room for planning", or empty
};

// `fitted` must share the truth's actions and observations and carry its rewards, horizon and
// discount; its number of states may differ. Throws std::invalid_argument on incompatible models.
// `star_returns`, when given, are true_plan_returns() for this replicate: in rollout mode they are
// the same for every fit of the replicate, so a caller measuring many fits computes them once.
ReturnGapResult return_gap(const Pomdp& truth, const Pomdp& fitted, const ReturnGapReference& reference,
                           const PlannerSettings& settings, const StreamKey& replicate_key,
                           const std::vector<double>* star_returns = nullptr, const StopToken& stop = {});

// Per-rollout returns of the true plan on the replicate's rollout stream (empty when values are
// exact or there is no room for planning).
std::vector<double> true_plan_returns(const Pomdp& truth, const ReturnGapReference& reference,
                                      const PlannerSettings& settings, const StreamKey& replicate_key,
                                      const StopToken& stop = {});

// max(1e-6 (1 + |V*|), 2 SE(V*)): below this V* - V_uniform leaves no room for planning.
double room_threshold(double v_star, double v_star_se);

// (v_star - v) / (v_star - v_uniform), or nullopt when v_star - v_uniform < room_threshold(v_star, v_star_se)
// or is not finite (an infinite or NaN denominator is no scale to measure by).
std::optional<double> normalised_gap(double v_star, double v_uniform, double v, double v_star_se = 0.0);

}  // namespace dobudget
