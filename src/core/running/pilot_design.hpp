// The pilot policy of one unit (issue 13), built from what the team holds before the pilot: the
// unit's logged episodes at the largest logged budget (no hidden states: Dataset holds none) and
// the observable shape of the problem (actions, observations, rewards, horizon). Every logged
// budget of the unit, 0 included, then fits the same pilot episodes, so the rows of a unit keep
// the nesting and sharing of unit.hpp; the logged budgets below the largest read as "what if the
// fit used fewer of the records the pilot was designed from".
//   uniform, usual-practice, complement: pilot_policy.hpp (counts of the logged episodes).
//   targeted: a regime-aware fit to the logged episodes (fit.hpp, settings.fit, stream
//     make_engine(key, Purpose::pilot_design)), its expected transition counts from one E-step
//     on them, then targeted_pilot.hpp. With no logged episodes there is nothing to design from
//     and the targeted pilot is uniform.
#pragma once
#include <memory>

#include "core/running/settings.hpp"
#include "core/running/stop.hpp"
#include "core/world/dataset.hpp"
#include "core/world/pilot_policy.hpp"
#include "core/world/seeding.hpp"

namespace dobudget {

// The observable part of a POMDP: sizes of actions and observations, rewards, horizon, discount;
// no states, no dynamics, no emissions. What a pilot design may know of the problem.
Pomdp observable_shape(const Pomdp& model);

// `logged` is read in full. `stop` is polled by the design fit.
std::unique_ptr<PilotPolicy> make_pilot_policy(const ScenarioSettings& settings, const Dataset& logged,
                                               const Pomdp& shape, const StreamKey& key, const StopToken& stop = {});

}  // namespace dobudget
