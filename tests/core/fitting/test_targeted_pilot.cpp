// The targeted pilot's rule (targeted_pilot.hpp), and (issue 13) that pilot data from every pilot
// policy stay unconfounded: a pilot-only fit recovers the interventional model as the pilot grows.
#include <catch2/catch.hpp>

#include <array>
#include <cmath>
#include <vector>

#include "core/fitting/fit.hpp"
#include "core/fitting/targeted_pilot.hpp"
#include "core/measures/model_kl.hpp"
#include "core/running/pilot_design.hpp"
#include "core/world/dataset.hpp"
#include "../confounded_world.hpp"

using namespace dobudget;

namespace {

using test::cf_closed_form;
using test::cf_environment;

using test::cf_predictive;

}  // namespace

TEST_CASE("targeted pilot: takes the action whose transitions the counts know least, with the floor",
          "[pilot-policy]") {
  Pomdp m;
  m.states = 2;
  m.actions = 2;
  m.observations = 2;
  m.horizon = 2;
  m.initial = Vector::Constant(2, 0.5);
  m.transitions.assign(2, Matrix::Constant(2, 2, 0.5));
  m.emissions = Matrix::Identity(2, 2);
  m.rewards = Vector::Zero(2);
  // Action 0 seen 100 times from each latent value, action 1 never.
  std::vector<Matrix> counts{Matrix::Constant(2, 2, 50.0), Matrix::Zero(2, 2)};
  TargetedPilot policy(m, counts, 0.1, 0.2);
  const std::int32_t o[] = {0};
  const auto u = policy.uncertainty(RecordedHistory(o, {}));
  // Dirichlet total variance (1 - sum m_j^2) / (alpha_0 + 1) with alpha = N + 1.1 (Kotz, Balakrishnan
  // and Johnson 2000, ch. 49): both rows are symmetric, so 1 - sum m_j^2 = 1/2.
  CHECK(u[0] == Approx(0.5 / (2 * 51.1 + 1)));
  CHECK(u[1] == Approx(0.5 / (2 * 1.1 + 1)));
  std::vector<double> p(2);
  policy.probabilities(RecordedHistory(o, {}), p);
  CHECK(p[1] == Approx(0.2 / 2 + 0.8));
  CHECK(p[0] == Approx(0.2 / 2));
  // After an episode the counts grow by the episode's expected transitions (one per step).
  const std::int32_t eo[] = {0, 1, 1}, ea[] = {1, 1};
  policy.episode_done(RecordedHistory(eo, ea));
  CHECK(policy.transition_counts()[1].sum() == Approx(2.0));
  CHECK(policy.transition_counts()[0].sum() == Approx(200.0));
}

TEST_CASE("pilot policies: pilot data from every policy recover the interventional model as the pilot grows",
          "[pilot-policy][confounding]") {
  // The policies read the records of state-aware loggers, so they act differently after each
  // observation, yet only on the record: pilot-only fits of their data must approach the
  // interventional conditional p(o_1 | o_0, do(a_0)), not the observational one (0.33 apart in the
  // confounded cells). Each cell is checked within 4 binomial standard errors of its pilot count at
  // the interventional value (normal approximation, *common practice*), at two budgets.
  const Environment env = cf_environment();
  std::array<double, 4> obs{}, itv{};
  for (int c = 0; c < 4; ++c) {
    obs[static_cast<std::size_t>(c)] = cf_closed_form(env, c / 2, c % 2, false);
    itv[static_cast<std::size_t>(c)] = cf_closed_form(env, c / 2, c % 2, true);
  }
  Engine logged_rng(606);
  const Dataset logged = simulate(env, Regime::logged, 3000, logged_rng);
  ScenarioSettings s;
  s.fit.latent_states = 2;
  s.fit.max_iterations = 3000;
  s.fit.tolerance = 1e-9;
  for (PilotPolicyKind kind : {PilotPolicyKind::usual_practice, PilotPolicyKind::complement, PilotPolicyKind::targeted}) {
    s.pilot.policy = kind;
    const auto policy = make_pilot_policy(s, logged, observable_shape(env.model), StreamKey{7, 0, 0, 0});
    Engine pilot_rng(707);
    const Dataset pilot = simulate_pilot(env, *policy, 8000, pilot_rng);
    double previous_error = 1.0;
    for (int n : {1000, 8000}) {
      Engine fit_rng(808);
      const FitResult f = fit({{&pilot, n, Regime::pilot}}, false, s.fit, env.model, fit_rng);
      const auto q = cf_predictive(f.model);
      std::array<int, 4> cells{};
      for (int i = 0; i < n; ++i) ++cells[static_cast<std::size_t>(2 * pilot.obs(i)[0] + pilot.act(i)[0])];
      double error = 0.0;
      for (int c = 0; c < 4; ++c) {
        const auto k = static_cast<std::size_t>(c);
        REQUIRE(cells[k] > 20);
        const double se = std::sqrt(itv[k] * (1.0 - itv[k]) / cells[k]);
        INFO(name(kind) << ", " << n << " pilot episodes, (o0, a0) = (" << c / 2 << ", " << c % 2 << "): fitted " << q[k]
                        << ", interventional " << itv[k] << ", observational " << obs[k] << ", " << cells[k]
                        << " episodes in the cell");
        CHECK(std::abs(q[k] - itv[k]) <= 4.0 * se);
        if (c == 1 || c == 2) CHECK(std::abs(q[k] - itv[k]) < std::abs(q[k] - obs[k]));
        error = std::max(error, std::abs(q[k] - itv[k]));
      }
      if (n == 8000) CHECK(error < 0.05);
      CHECK(error <= previous_error + 0.02);
      previous_error = error;
    }
  }
}
