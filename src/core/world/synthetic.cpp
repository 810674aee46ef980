#include "core/world/synthetic.hpp"

#include "core/world/logging_policy.hpp"
#include "core/world/posterior_world.hpp"
#include "core/world/sampling.hpp"

#include <stdexcept>

namespace dobudget {

Pomdp draw_pomdp(const SyntheticFamily& f, int horizon, double discount, Engine& rng) {
  Pomdp m;
  m.states = f.states;
  m.actions = f.actions;
  m.observations = f.observations;
  m.horizon = horizon;
  m.discount = discount;
  m.initial.resize(f.states);
  sample_dirichlet(rng, 1.0, f.states, m.initial.data());
  m.transitions.assign(static_cast<std::size_t>(f.actions), Matrix(f.states, f.states));
  for (auto& T : m.transitions)
    for (int s = 0; s < f.states; ++s) sample_dirichlet(rng, f.dynamics_concentration, f.states, T.row(s).data());
  m.emissions.resize(f.states, f.observations);
  Vector noise(f.observations);
  for (int s = 0; s < f.states; ++s) {
    sample_dirichlet(rng, 1.0, f.observations, noise.data());
    for (int o = 0; o < f.observations; ++o)
      m.emissions(s, o) = f.observation_noise * noise(o) + ((o == s % f.observations) ? 1.0 - f.observation_noise : 0.0);
  }
  m.rewards.resize(f.observations);
  for (int o = 0; o < f.observations; ++o) m.rewards(o) = uniform01(rng);
  return m;
}

Environment make_environment(const ScenarioSettings& s, const StreamKey& key) {
  Environment env;
  if (s.environment.given) {
    env = *s.environment.given;
    env.model.horizon = s.environment.horizon;
    env.model.discount = s.environment.discount;
  } else if (s.environment.records) {
    // A plausible world given the team's records (posterior_world.hpp), from the environment stream
    // of the draw, with its own decision rule as the logger.
    const RecordsSettings& r = *s.environment.records;
    if (!r.posterior) throw std::logic_error("make_environment: the records have not been fitted (io/records_study.hpp)");
    StreamKey k = key;
    k.replicate = 0;
    Engine rng = make_engine(k, Purpose::environment);
    env = draw_plausible_world(*r.posterior, r.concentration, rng);
    env.model.horizon = s.environment.horizon;
    env.model.discount = s.environment.discount;
  } else {
    StreamKey k = key;
    k.replicate = 0;  // one environment per (scenario, draw), shared by its replicates
    Engine rng = make_engine(k, Purpose::environment);
    env.model = draw_pomdp(s.environment.family, s.environment.horizon, s.environment.discount, rng);
  }
  if (env.logging_policy.size() == 0) env.logging_policy = privileged_logging_policy(env.model, s.logging);
  return env;
}

}  // namespace dobudget
