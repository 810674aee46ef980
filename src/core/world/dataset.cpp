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

}  // namespace dobudget
