#include "core/world/dataset.hpp"

#include <boost/random/uniform_int_distribution.hpp>

#include "core/world/sampling.hpp"

namespace dobudget {

double Dataset::observations_in(int n) const {
  if (lengths.empty()) return static_cast<double>(n) * (horizon + 1);
  double total = 0.0;
  for (int i = 0; i < n; ++i) total += length(i) + 1;
  return total;
}

Dataset simulate(const Environment& env, Regime regime, int n, Engine& rng) {
  const Pomdp& m = env.model;
  Dataset d;
  d.horizon = m.horizon;
  d.count = n;
  d.observations.resize(static_cast<std::size_t>(n) * (m.horizon + 1));
  d.actions.resize(static_cast<std::size_t>(n) * m.horizon);
  boost::random::uniform_int_distribution<int> uniform_action(0, m.actions - 1);
  for (int i = 0; i < n; ++i) {
    auto* o = d.observations.data() + static_cast<std::ptrdiff_t>(i) * (m.horizon + 1);
    auto* a = d.actions.data() + static_cast<std::ptrdiff_t>(i) * m.horizon;
    int s = sample_categorical(rng, m.initial.data(), m.states);
    o[0] = sample_categorical(rng, m.emissions.row(s).data(), m.observations);
    for (int t = 0; t < m.horizon; ++t) {
      a[t] = regime == Regime::logged ? sample_categorical(rng, env.logging_policy.row(s).data(), m.actions)
                                      : uniform_action(rng);
      s = sample_categorical(rng, m.transitions[static_cast<std::size_t>(a[t])].row(s).data(), m.states);
      o[t + 1] = sample_categorical(rng, m.emissions.row(s).data(), m.observations);
    }
  }
  return d;
}

Dataset simulate_pilot(const Environment& env, PilotPolicy& policy, int n, Engine& rng) {
  if (policy.uniform()) return simulate(env, Regime::pilot, n, rng);
  const Pomdp& m = env.model;
  Dataset d;
  d.horizon = m.horizon;
  d.count = n;
  d.observations.resize(static_cast<std::size_t>(n) * (m.horizon + 1));
  d.actions.resize(static_cast<std::size_t>(n) * m.horizon);
  std::vector<double> p(static_cast<std::size_t>(m.actions));
  for (int i = 0; i < n; ++i) {
    auto* o = d.observations.data() + static_cast<std::ptrdiff_t>(i) * (m.horizon + 1);
    auto* a = d.actions.data() + static_cast<std::ptrdiff_t>(i) * m.horizon;
    int s = sample_categorical(rng, m.initial.data(), m.states);
    o[0] = sample_categorical(rng, m.emissions.row(s).data(), m.observations);
    for (int t = 0; t < m.horizon; ++t) {
      // The policy reads o_0..o_t and a_0..a_{t-1}; the state s stays here.
      policy.probabilities(RecordedHistory({o, static_cast<std::size_t>(t) + 1}, {a, static_cast<std::size_t>(t)}), p);
      a[t] = sample_categorical(rng, p.data(), m.actions);
      s = sample_categorical(rng, m.transitions[static_cast<std::size_t>(a[t])].row(s).data(), m.states);
      o[t + 1] = sample_categorical(rng, m.emissions.row(s).data(), m.observations);
    }
    policy.episode_done(RecordedHistory({o, static_cast<std::size_t>(m.horizon) + 1}, {a, static_cast<std::size_t>(m.horizon)}));
  }
  return d;
}

}  // namespace dobudget
