// The pilot policy of one unit; see pilot_design.hpp.
#include "core/running/pilot_design.hpp"

#include "core/fitting/fit.hpp"
#include "core/fitting/forward_backward.hpp"
#include "core/fitting/targeted_pilot.hpp"

namespace dobudget {

Pomdp observable_shape(const Pomdp& model) {
  Pomdp s;
  s.states = 0;
  s.actions = model.actions;
  s.observations = model.observations;
  s.rewards = model.rewards;
  s.horizon = model.horizon;
  s.discount = model.discount;
  return s;
}

std::unique_ptr<PilotPolicy> make_pilot_policy(const ScenarioSettings& s, const Dataset& logged, const Pomdp& shape,
                                               const StreamKey& key, const StopToken& stop) {
  const PilotSettings& p = s.pilot;
  const int A = shape.actions, O = shape.observations;
  switch (p.policy) {
    case PilotPolicyKind::uniform: break;
    case PilotPolicyKind::usual_practice:
      return std::make_unique<UsualPracticePilot>(action_counts(logged, logged.count, O, A), p.explore);
    case PilotPolicyKind::complement:
      return std::make_unique<ComplementPilot>(action_counts(logged, logged.count, O, A), p.floor);
    case PilotPolicyKind::targeted: {
      if (logged.count == 0) break;
      const std::vector<DataView> views{{&logged, logged.count, Regime::logged}};
      Engine rng = make_engine(key, Purpose::pilot_design);
      const FitResult f = fit(views, true, s.fit, shape, rng, {}, stop);
      ForwardBackward fb(f.model.states, A, O, logged.horizon);
      fb.load(f.model, &f.decision);
      ExpectedCounts c;
      c.reset(f.model.states, A, O);
      fb.accumulate(views.front(), c);
      return std::make_unique<TargetedPilot>(f.model, c.transitions, s.fit.prior, p.floor);
    }
  }
  return std::make_unique<UniformPilot>(A);
}

}  // namespace dobudget
