// The synthetic family of environments (docs/design.md, "The synthetic family"):
//   p0 ~ Dirichlet(1), T[a](s, .) ~ Dirichlet(dynamics_concentration),
//   E(s, .) = (1 - observation_noise) onehot(s mod |O|) + observation_noise Dirichlet(1),
//   r(o) ~ Uniform(0, 1).
#pragma once
#include "core/world/pomdp.hpp"
#include "core/world/seeding.hpp"
#include "core/running/settings.hpp"

namespace dobudget {

// Draws the POMDP part of one environment from `rng` (the Purpose::environment stream).
Pomdp draw_pomdp(const SyntheticFamily& family, int horizon, double discount, Engine& rng);

// The environment of draw `key.draw` of a scenario: the given model (its logging policy, or one
// built from `logging`), a plausible world given the records (its own decision rule as logger;
// the records must have been fitted), or a synthetic draw, with the privileged logger attached.
Environment make_environment(const ScenarioSettings& s, const StreamKey& key);

}  // namespace dobudget
