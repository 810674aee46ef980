// Test fixture: a small world with two hidden states that emit distinct symbols, two actions and
// three symbols, whose numbers each test chooses (invented for the tests, not data). Action 0
// "stays" (T[0](s, s) large), action 1 "moves"; the loggers see the hidden state.
#pragma once
#include "core/world/pomdp.hpp"

namespace dobudget::test {

struct TwoStateNumbers {
  int horizon = 5;
  double initial0 = 0.7;               // p(s_0 = 0)
  double stay00 = 0.9, stay11 = 0.8;   // T[0](0, 0), T[0](1, 1); T[1] rows are (0.3, 0.7), (0.6, 0.4)
  double logged0 = 1.0, logged1 = 0.35;  // the loggers' p(a = 0 | s) in states 0 and 1
  bool rewards = true;                 // r(o) = (1, 0, -1), else 0
};

inline Environment two_state_world(const TwoStateNumbers& w) {
  Environment env;
  Pomdp& m = env.model;
  m.states = 2;
  m.actions = 2;
  m.observations = 3;
  m.horizon = w.horizon;
  m.initial.resize(2);
  m.initial << w.initial0, 1.0 - w.initial0;
  Matrix stay(2, 2), move(2, 2);
  stay << w.stay00, 1.0 - w.stay00, 1.0 - w.stay11, w.stay11;
  move << 0.3, 0.7, 0.6, 0.4;
  m.transitions = {stay, move};
  m.emissions.resize(2, 3);
  m.emissions << 0.8, 0.15, 0.05, 0.1, 0.2, 0.7;
  m.rewards.resize(3);
  if (w.rewards)
    m.rewards << 1.0, 0.0, -1.0;
  else
    m.rewards.setZero();
  env.logging_policy.resize(2, 2);
  env.logging_policy << w.logged0, 1.0 - w.logged0, w.logged1, 1.0 - w.logged1;
  return env;
}

}  // namespace dobudget::test
