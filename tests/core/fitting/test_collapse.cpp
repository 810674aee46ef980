// Collapsed latent values (collapse.hpp) and the escape from them in fit().
#include <catch2/catch.hpp>

#include <algorithm>
#include <vector>

#include "core/fitting/collapse.hpp"
#include "core/world/dataset.hpp"
#include "core/fitting/fit.hpp"

using namespace dobudget;

namespace {

Pomdp three_latent() {
  Pomdp m;
  m.states = 3;
  m.actions = 2;
  m.observations = 2;
  m.horizon = 3;
  m.initial = Vector::Constant(3, 1.0 / 3.0);
  Matrix T0(3, 3), T1(3, 3);
  T0 << 0.8, 0.1, 0.1, 0.1, 0.8, 0.1, 0.1, 0.1, 0.8;
  T1 << 0.1, 0.1, 0.8, 0.8, 0.1, 0.1, 0.1, 0.8, 0.1;
  m.transitions = {T0, T1};
  m.emissions.resize(3, 2);
  m.emissions << 0.9, 0.1, 0.5, 0.5, 0.1, 0.9;
  m.rewards = Vector::Zero(2);
  return m;
}

// A 2-state truth with well separated emissions (numbers chosen here).
Environment two_state_truth() {
  Environment env;
  Pomdp& m = env.model;
  m.states = 2;
  m.actions = 2;
  m.observations = 2;
  m.horizon = 4;
  m.initial = Vector::Constant(2, 0.5);
  Matrix T0(2, 2), T1(2, 2);
  T0 << 0.9, 0.1, 0.2, 0.8;
  T1 << 0.3, 0.7, 0.6, 0.4;
  m.transitions = {T0, T1};
  m.emissions.resize(2, 2);
  m.emissions << 0.9, 0.1, 0.15, 0.85;
  m.rewards = Vector::Zero(2);
  env.logging_policy = Matrix::Constant(2, 2, 0.5);
  return env;
}

}  // namespace

TEST_CASE("collapse: latent values that predict alike are found, aliased ones are not", "[collapse]") {
  Pomdp m = three_latent();
  const Matrix none;
  CHECK_FALSE(collapsed_pair(m, none, 0.02).has_value());
  // Hand check of d(0, 2): emissions differ by TV 0.8.
  CHECK(latent_distance(m, none, 0, 2) == Approx(0.8));

  // Latent 2 made a copy of latent 0 (emission and outgoing transitions): the pair (0, 2) collapses.
  for (auto& T : m.transitions) T.row(2) = T.row(0);
  m.emissions.row(2) = m.emissions.row(0);
  const auto pair = collapsed_pair(m, none, 0.02);
  REQUIRE(pair.has_value());
  CHECK(pair->first == 0);
  CHECK(pair->second == 2);
  // ... unless their decision rules differ (the logged actions tell them apart).
  Matrix qA(3, 2);
  qA << 0.9, 0.1, 0.5, 0.5, 0.1, 0.9;
  CHECK_FALSE(collapsed_pair(m, qA, 0.02).has_value());

  // Aliased states (common in POMDPs): the same emission row, different next observations.
  Pomdp a = three_latent();
  a.emissions.row(1) = a.emissions.row(0);
  CHECK(latent_distance(a, none, 0, 1) > 0.2);
  CHECK_FALSE(collapsed_pair(a, none, 0.02).has_value());
}

TEST_CASE("collapse: a split keeps probability rows and their mean, and separates the pair", "[collapse]") {
  Pomdp m = three_latent();
  for (auto& T : m.transitions) T.row(2) = T.row(0);
  m.emissions.row(2) = m.emissions.row(0);
  Matrix qA = Matrix::Constant(3, 2, 0.5);
  const Eigen::RowVectorXd mean = 0.5 * (m.emissions.row(0) + m.emissions.row(2));
  Engine rng(7);
  split_latent_pair(rng, 0, 2, m, qA);
  for (int z = 0; z < 3; ++z) {
    CHECK(m.emissions.row(z).sum() == Approx(1.0).epsilon(1e-12));
    CHECK(m.emissions.row(z).minCoeff() > 0.0);
    CHECK(qA.row(z).sum() == Approx(1.0).epsilon(1e-12));
  }
  const Eigen::RowVectorXd after = 0.5 * (m.emissions.row(0) + m.emissions.row(2));
  CHECK((after - mean).cwiseAbs().maxCoeff() < 1e-12);
  CHECK(latent_distance(m, qA, 0, 2) > 0.02);
}

TEST_CASE("collapse: EM stays at equal emission rows, fit() escapes them", "[collapse][fit]") {
  // Two latent values that are copies of one another (same emission row, same outgoing transition
  // rows): the posterior over them does not depend on the data, so the M-step gives both the same
  // rows again: a fixed point of EM (Dempster, Laird and Rubin 1977 for EM's fixed points), with the
  // likelihood of a single latent value (exactly so without prior). fit() splits such a start and reaches the optimum.
  const Environment env = two_state_truth();
  Engine data_rng(31);
  const Dataset pilot = simulate(env, Regime::pilot, 400, data_rng);
  const std::vector<DataView> views{{&pilot, pilot.count, Regime::pilot}};

  Pomdp collapsed = env.model;
  collapsed.emissions.row(0) << 0.5, 0.5;
  collapsed.emissions.row(1) << 0.5, 0.5;
  for (auto& T : collapsed.transitions) T << 0.6, 0.4, 0.6, 0.4;
  collapsed.initial << 0.6, 0.4;  // the stationary law of those rows: P(z_t) = (0.6, 0.4) at every t
  Matrix none;
  Pomdp stepped = collapsed;
  for (int k = 0; k < 20; ++k) em_step(views, 0.0, stepped, none);  // without prior: exactly
  CHECK(latent_distance(stepped, none, 0, 1) < 1e-9);  // EM alone never leaves it

  FitSettings s;
  s.latent_states = 2;
  s.restarts = 2;  // the warm start and one random start
  s.max_restarts = 2;
  s.prior = 0.0;
  Engine rng(32);
  const FitResult f = fit(views, false, s, env.model, rng, {{&collapsed, nullptr}});
  REQUIRE(f.restart_objectives.size() == 2);
  const double stuck = log_likelihood(views, stepped, none);
  INFO("collapsed start ends at " << f.restart_objectives[0] << ", best " << f.objective << ", EM alone "
                                  << stuck << "; escapes " << f.escapes);
  CHECK(f.escapes >= 1);
  CHECK(f.restart_objectives[0] > stuck + 50.0);             // the split start left the fixed point ...
  CHECK(f.restart_objectives[0] >= f.objective - 1e-4 * 2000);  // ... and reached the best optimum
  CHECK(f.confirmed);
  CHECK(latent_distance(f.model, none, 0, 1) > 0.5);
}
