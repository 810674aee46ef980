// Test fixture: the confounded problem of tests/core/fitting/test_confounding.cpp (horizon 1; all
// numbers chosen there, invented for the tests): hidden s in {0, 1}, p0 = (1/2, 1/2),
// E = [[0.9, 0.1], [0.3, 0.7]], action 0 keeps and action 1 swaps the state with probability 0.95,
// loggers take a = s with probability 0.95. With its closed form: p(o_1 = 0 | o_0, a), by the
// back-door adjustment (Pearl, "Causality", 2nd ed., 2009, sec. 3.3, theorem 3.3.2) for do(a), or
// the observational conditional that weights by pi_log(a | s).
#pragma once
#include <array>
#include <vector>

#include "core/measures/model_kl.hpp"
#include "core/world/dataset.hpp"
#include "core/world/pomdp.hpp"

namespace dobudget::test {

inline Environment cf_environment() {
  Environment env;
  Pomdp& m = env.model;
  m.states = 2;
  m.actions = 2;
  m.observations = 2;
  m.horizon = 1;
  m.initial = Vector::Constant(2, 0.5);
  Matrix keep(2, 2), swap(2, 2);
  keep << 0.95, 0.05, 0.05, 0.95;
  swap << 0.05, 0.95, 0.95, 0.05;
  m.transitions = {keep, swap};
  m.emissions.resize(2, 2);
  m.emissions << 0.9, 0.1, 0.3, 0.7;
  m.rewards = Vector::Zero(2);
  env.logging_policy.resize(2, 2);
  env.logging_policy << 0.95, 0.05, 0.05, 0.95;
  return env;
}

inline double cf_closed_form(const Environment& env, int o0, int a, bool interventional) {
  const Pomdp& m = env.model;
  double post[2], z = 0.0;
  for (int s = 0; s < 2; ++s) {
    post[s] = m.initial(s) * m.emissions(s, o0) * (interventional ? 1.0 : env.logging_policy(s, a));
    z += post[s];
  }
  double p = 0.0;
  for (int s = 0; s < 2; ++s)
    for (int s2 = 0; s2 < 2; ++s2) p += post[s] / z * m.transitions[static_cast<std::size_t>(a)](s, s2) * m.emissions(s2, 0);
  return p;
}

// A fitted model's predictive q(o_1 = 0 | o_0, do(a_0)) by belief filtering (model_kl.hpp predictives()),
// for the four histories (o_0, a_0), indexed 2 * o_0 + a_0.
inline std::array<double, 4> cf_predictive(const Pomdp& model) {
  Dataset h;
  h.horizon = 1;
  h.count = 4;
  for (int o0 = 0; o0 < 2; ++o0)
    for (int a = 0; a < 2; ++a) {
      h.observations.push_back(o0);
      h.observations.push_back(0);  // o_1: not used by the predictive of o_1
      h.actions.push_back(a);
    }
  std::vector<double> out;
  predictives(model, h, out);
  std::array<double, 4> q{};
  for (int i = 0; i < 4; ++i) q[static_cast<std::size_t>(i)] = out[static_cast<std::size_t>((i * 2 + 1) * 2 + 0)];
  return q;
}

}  // namespace dobudget::test
