// Episodes of one regime, stored contiguously: episode i has observations o_0..o_H at
// observations[i*(H+1) + t] and actions a_0..a_{H-1} at actions[i*H + t]. An episode may stop
// early (imported records): then it has length(i) <= H actions, o_0..o_{length(i)}, and the
// slots after its end are unused (the stride stays H). Budgets are nested:
// a budget of n episodes is the first n episodes of the largest budget's data (docs/design.md, "Seeding and reproducibility").
#pragma once
#include <cstdint>
#include <vector>

#include "core/world/pilot_policy.hpp"
#include "core/world/pomdp.hpp"
#include "core/world/seeding.hpp"

namespace dobudget {

enum class Regime { pilot, logged };

struct Dataset {
  int horizon = 0;
  int count = 0;
  std::vector<std::int32_t> observations;
  std::vector<std::int32_t> actions;
  // Actions per episode when episodes differ in length; empty: every episode has `horizon`.
  std::vector<std::int32_t> lengths;

  int length(int i) const { return lengths.empty() ? horizon : lengths[static_cast<std::size_t>(i)]; }
  // Observations in the first n episodes: sum_i (length(i) + 1).
  double observations_in(int n) const;

  const std::int32_t* obs(int i) const { return observations.data() + static_cast<std::ptrdiff_t>(i) * (horizon + 1); }
  const std::int32_t* act(int i) const { return actions.data() + static_cast<std::ptrdiff_t>(i) * horizon; }
};

// A prefix of a dataset, as seen by a fit: the first `count` episodes, with the regime they
// were recorded under.
struct DataView {
  const Dataset* data = nullptr;
  int count = 0;
  Regime regime = Regime::pilot;
};

// n episodes of `env` where actions come from the uniform policy (pilot regime, and the default
// evaluation policy) or from the privileged logging policy acting on the hidden state (logged
// regime). Per step: a_t, then s_{t+1} ~ T[a_t](s_t, .), then o_{t+1} ~ E(s_{t+1}, .).
Dataset simulate(const Environment& env, Regime regime, int n, Engine& rng);

// n pilot episodes of `env` whose actions come from `policy` (pilot_policy.hpp), which is given
// the recorded history only (never the state); episodes run in order, and the policy is told of
// each finished one. With a uniform policy the output is simulate(env, Regime::pilot, n, rng)'s,
// draw for draw; otherwise a_t ~ p(. | record) by inverse transform on one uniform.
Dataset simulate_pilot(const Environment& env, PilotPolicy& policy, int n, Engine& rng);

}  // namespace dobudget
