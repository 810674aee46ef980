// Pilot policies in a unit (issue 13; pilot_design.hpp, unit.cpp): scenarios that differ only in
// pilot.policy are paired (seeding.hpp): they share worlds, logged data and evaluation histories,
// and the uniform scenario's rows are those of a study without a policy list.
#include <catch2/catch.hpp>

#include <cmath>
#include <vector>

#include "core/running/pilot_design.hpp"
#include "core/running/settings.hpp"
#include "core/running/unit.hpp"

using namespace dobudget;

namespace {

Study pd_study() {
  Study st;
  st.name = "pilot-design";
  st.seed = 17;
  Scenario sc;
  sc.index = 0;
  ScenarioSettings& s = sc.settings;
  s.environment.family.states = 3;
  s.environment.family.actions = 2;
  s.environment.family.observations = 3;
  s.environment.family.dynamics_concentration = 0.5;
  s.environment.horizon = 4;
  s.environment.draws = 2;
  s.logged_budgets = {0, 60};
  s.pilot_budgets = {0, 10, 30};
  s.replicates = 2;
  s.measures = {Measure::model_kl};
  s.fit.latent_states = 3;
  s.fit.restarts = 2;
  s.fit.max_iterations = 20;
  s.evaluation.trajectories = 80;
  int index = 0;
  for (PilotPolicyKind p : all_pilot_policies) {
    sc.index = index++;
    sc.settings.pilot.policy = p;
    sc.assignments = {{"pilot.policy", std::string(name(p))}};
    sc.label = "pilot.policy=" + std::string(name(p));
    st.scenarios.push_back(sc);
  }
  return st;
}

bool pd_same(const RunRecord& x, const RunRecord& y) {
  return x.environment == y.environment && x.replicate == y.replicate && x.strategy == y.strategy &&
         x.logged == y.logged && x.pilot == y.pilot && x.model_kl == y.model_kl && x.loglik == y.loglik &&
         x.iterations == y.iterations && x.converged == y.converged;
}

}  // namespace

TEST_CASE("pilot design: paired comparison rows share worlds, logged data and evaluation histories", "[pilot-policy][paired]") {
  const Study st = pd_study();
  // A study of the uniform scenario alone, as earlier versions ran it.
  Study alone = st;
  alone.scenarios.resize(1);
  alone.scenarios[0].assignments.clear();
  alone.scenarios[0].label.clear();
  int shared = 0, differing = 0;
  for (int d = 0; d < 2; ++d) {
    const DrawContext c0 = make_draw_context(st, 0, d);
    for (int r = 0; r < 2; ++r) {
      const auto u = run_unit(st, UnitId{0, d, r}, c0);
      const auto base = run_unit(alone, UnitId{0, d, r}, make_draw_context(alone, 0, d));
      REQUIRE(u.size() == base.size());
      for (std::size_t i = 0; i < u.size(); ++i) CHECK(pd_same(u[i], base[i]));
      for (int k = 1; k < static_cast<int>(st.scenarios.size()); ++k) {
        const DrawContext ck = make_draw_context(st, k, d);
        CHECK(ck.environment.model.transitions[0] == c0.environment.model.transitions[0]);  // the same world
        CHECK(ck.environment.model.emissions == c0.environment.model.emissions);
        CHECK(ck.environment.logging_policy == c0.environment.logging_policy);
        const auto p = run_unit(st, UnitId{k, d, r}, ck);
        REQUIRE(p.size() == u.size());
        for (std::size_t i = 0; i < u.size(); ++i) {
          INFO(name(st.scenarios[static_cast<std::size_t>(k)].settings.pilot.policy)
               << " draw " << d << " replicate " << r << ": " << name(u[i].strategy) << " logged " << u[i].logged
               << " pilot " << u[i].pilot);
          CHECK(p[i].scenario == k);
          if (u[i].pilot == 0) {
            // No pilot data: the same logged data, fitted the same way and measured on the same
            // evaluation histories, give the same row (pilot-only at pilot 0 has no data at all).
            CHECK(pd_same(p[i], u[i]));
            ++shared;
          } else if (!pd_same(p[i], u[i])) {
            ++differing;  // other pilot data
          }
        }
      }
    }
  }
  // Per unit and policy: pilot 0 rows, 3 strategies x 2 logged budgets.
  CHECK(shared == 2 * 2 * 3 * 6);
  CHECK(differing > 0);
}

TEST_CASE("pilot design: with no logged episodes every policy is the uniform pilot", "[pilot-policy]") {
  ScenarioSettings s;
  Dataset none;
  none.horizon = 3;
  Pomdp shape;
  shape.actions = 3;
  shape.observations = 2;
  shape.horizon = 3;
  for (PilotPolicyKind p : all_pilot_policies) {
    s.pilot.policy = p;
    const auto policy = make_pilot_policy(s, none, shape, StreamKey{});
    std::vector<double> q(3);
    const std::int32_t o[] = {1};
    policy->probabilities(RecordedHistory(o, {}), q);
    for (double x : q) CHECK(x == Approx(1.0 / 3));
  }
}
