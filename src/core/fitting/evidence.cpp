#include "core/fitting/evidence.hpp"

#include <algorithm>

namespace dobudget {

RegimeCounts expected_counts_by_regime(const Pomdp& m, const Matrix& decision, const Dataset& logged,
                                       const Dataset& pilot) {
  RegimeCounts c;
  c.logged.reset(m.states, m.actions, m.observations);
  c.pilot.reset(m.states, m.actions, m.observations);
  ForwardBackward fb(m.states, m.actions, m.observations, std::max({1, logged.horizon, pilot.horizon}));
  fb.load(m, decision.size() > 0 ? &decision : nullptr);
  if (logged.count > 0) fb.accumulate(DataView{&logged, logged.count, Regime::logged}, c.logged);
  if (pilot.count > 0) fb.accumulate(DataView{&pilot, pilot.count, Regime::pilot}, c.pilot);
  return c;
}

ExpectedCounts combined(const RegimeCounts& c) {
  ExpectedCounts s = c.logged;
  s.initial += c.pilot.initial;
  for (std::size_t a = 0; a < s.transitions.size(); ++a) s.transitions[a] += c.pilot.transitions[a];
  s.emissions += c.pilot.emissions;
  s.decision += c.pilot.decision;  // zero: pilot steps carry no decision rule
  s.loglik += c.pilot.loglik;
  return s;
}

Evidence transition_evidence(const RegimeCounts& c) {
  const auto Z = c.logged.emissions.rows();
  const auto A = static_cast<Eigen::Index>(c.logged.transitions.size());
  Evidence e;
  e.logged = Matrix::Zero(Z, A);
  e.pilot = Matrix::Zero(Z, A);
  for (Eigen::Index a = 0; a < A; ++a) {
    e.logged.col(a) = c.logged.transitions[static_cast<std::size_t>(a)].rowwise().sum();
    e.pilot.col(a) = c.pilot.transitions[static_cast<std::size_t>(a)].rowwise().sum();
  }
  return e;
}

}  // namespace dobudget
