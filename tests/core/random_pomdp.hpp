// Test fixture shared by the planner, plan-value and return-gap tests: a random POMDP with
// Dirichlet(concentration) rows (normalised Gamma draws) and Uniform(0, 1) rewards, drawn from
// Boost.Random so that every platform builds the same problem.
#pragma once
#include <boost/random/gamma_distribution.hpp>
#include <boost/random/uniform_01.hpp>

#include "core/world/pomdp.hpp"
#include "core/world/seeding.hpp"

namespace dobudget::test {

inline Pomdp random_pomdp(int S, int A, int O, int H, double gamma, std::uint64_t seed, double concentration = 1.0) {
  Engine eng(seed);
  boost::random::gamma_distribution<double> G(concentration);
  boost::random::uniform_01<double> U;
  auto fill = [&](auto row) {
    double z = 0.0;
    for (Eigen::Index i = 0; i < row.size(); ++i) z += (row(i) = G(eng));
    row /= z;
  };
  Pomdp m;
  m.states = S;
  m.actions = A;
  m.observations = O;
  m.horizon = H;
  m.discount = gamma;
  m.initial.resize(S);
  fill(m.initial.transpose());
  m.transitions.assign(A, Matrix(S, S));
  for (auto& T : m.transitions)
    for (int s = 0; s < S; ++s) fill(T.row(s));
  m.emissions.resize(S, O);
  for (int s = 0; s < S; ++s) fill(m.emissions.row(s));
  m.rewards.resize(O);
  for (int o = 0; o < O; ++o) m.rewards(o) = U(eng);
  return m;
}

}  // namespace dobudget::test
