// Stopping a unit part-way (src/core/running/stop.hpp): a requested stop is seen at the next poll of every
// long loop (EM, model_kl, planner, rollouts) and throws Cancelled; a cancelled unit is never
// delivered by run_units; a token that never stops changes no result (bit-identical).
#include <catch2/catch.hpp>

#include <atomic>
#include <cmath>
#include <cstring>
#include <vector>

#include "../same_bits.hpp"
#include "core/world/dataset.hpp"
#include "core/fitting/fit.hpp"
#include "core/measures/model_kl.hpp"
#include "core/measures/plan_value.hpp"
#include "core/measures/planner.hpp"
#include "core/measures/return_gap.hpp"
#include "core/running/runner.hpp"
#include "core/running/stop.hpp"
#include "core/world/synthetic.hpp"
#include "core/running/unit.hpp"
#include "../random_pomdp.hpp"

using namespace dobudget;
using dobudget::test::same_bits;

namespace {

// A token that says "stop" from its `after`-th poll on, counting every poll.
struct CountingStop {
  std::atomic<int> polls{0};
  int after = 1;
  StopToken token() {
    return StopToken([this] { return ++polls >= after; });
  }
};

ScenarioSettings st_settings() {
  ScenarioSettings s;
  s.environment.family = {4, 2, 3, 0.5, 0.3};
  s.environment.horizon = 6;
  s.environment.draws = 1;
  s.fit.latent_states = 4;
  s.fit.restarts = 2;
  s.fit.max_iterations = 50;
  return s;
}

Study st_study() {
  Study st;
  st.name = "stop";
  st.seed = 5;
  Scenario sc;
  sc.settings = st_settings();
  sc.settings.environment.draws = 2;
  sc.settings.replicates = 3;
  sc.settings.logged_budgets = {0, 40};
  sc.settings.pilot_budgets = {5, 15};
  sc.settings.fit.max_iterations = 15;
  sc.settings.evaluation.trajectories = 40;
  st.scenarios.push_back(sc);
  return st;
}

}  // namespace

TEST_CASE("stop: a fit with a stop already requested reports cancelled at its first poll, before any E-step",
          "[stop]") {
  const ScenarioSettings s = st_settings();
  const Environment env = make_environment(s, StreamKey{1, 0, 0, 0});
  Engine data_rng(3);
  const Dataset pilot = simulate(env, Regime::pilot, 500, data_rng);
  CountingStop stop;  // true at the first poll
  Engine rng(9);
  CHECK_THROWS_AS(fit({{&pilot, 500, Regime::pilot}}, false, s.fit, env.model, rng, {}, stop.token()), Cancelled);
  CHECK(stop.polls == 1);  // it returned at once: one poll, no E-step after it
}

TEST_CASE("stop: a stop requested part-way ends the fit at the next E-step", "[stop]") {
  ScenarioSettings s = st_settings();
  s.fit.tolerance = 1e-300;  // would run to the cap of 50 E-steps per start
  const Environment env = make_environment(s, StreamKey{1, 0, 0, 0});
  Engine data_rng(3);
  const Dataset pilot = simulate(env, Regime::pilot, 200, data_rng);
  CountingStop stop;
  stop.after = 7;
  Engine rng(9);
  CHECK_THROWS_AS(fit({{&pilot, 200, Regime::pilot}}, false, s.fit, env.model, rng, {}, stop.token()), Cancelled);
  CHECK(stop.polls == 7);  // polled once per E-step; the 7th saw the stop and nothing ran after it
}

TEST_CASE("stop: polling changes no arithmetic (a token that never stops gives the same fit bit for bit)", "[stop]") {
  const ScenarioSettings s = st_settings();
  const Environment env = make_environment(s, StreamKey{1, 0, 0, 0});
  Engine data_rng(3);
  const Dataset pilot = simulate(env, Regime::pilot, 100, data_rng);
  const Dataset logged = simulate(env, Regime::logged, 100, data_rng);
  const std::vector<DataView> views{{&pilot, 100, Regime::pilot}, {&logged, 100, Regime::logged}};
  Engine r1(9), r2(9);
  CountingStop never;
  never.after = 1 << 30;
  const FitResult a = fit(views, true, s.fit, env.model, r1);
  const FitResult b = fit(views, true, s.fit, env.model, r2, {}, never.token());
  CHECK(never.polls > 0);
  CHECK(std::memcmp(&a.objective, &b.objective, sizeof(double)) == 0);
  CHECK(a.iterations == b.iterations);
  CHECK(same_bits(a.model.emissions, b.model.emissions));
  CHECK(same_bits(a.model.transitions[1], b.model.transitions[1]));
  CHECK(same_bits(a.decision, b.decision));
}

TEST_CASE("stop: model_kl, the planner and rollouts end at their first poll when a stop is requested", "[stop]") {
  const Pomdp m = test::random_pomdp(4, 2, 3, 6, 1.0, 17);
  PlannerSettings p;
  p.belief_points = 50;
  {
    CountingStop stop;
    CHECK_THROWS_AS(plan(m, p, StreamKey{1, 0, 0, 0}, stop.token()), Cancelled);
    CHECK(stop.polls == 1);
  }
  const Plan pl = plan(m, p, StreamKey{1, 0, 0, 0});
  {
    CountingStop stop;
    CHECK_THROWS_AS(rollout_plan_value(m, m, pl, 1000, StreamKey{1, 0, 0, 0}, nullptr, stop.token()), Cancelled);
    CHECK(stop.polls == 1);
  }
  {
    CountingStop stop;
    CHECK_THROWS_AS(prepare_return_gap(m, p, StreamKey{1, 0, 0, 0}, stop.token()), Cancelled);
    CHECK(stop.polls == 1);
  }
  Environment env;
  env.model = m;
  env.logging_policy = Matrix::Constant(4, 2, 0.5);
  Engine rng(2);
  const EvaluationSet eval = make_evaluation_set(m, simulate(env, Regime::pilot, 1000, rng));
  {
    CountingStop stop;
    stop.after = 3;  // polled every 256 histories: the 3rd poll is at history 512
    CHECK_THROWS_AS(model_kl(eval, m, stop.token()), Cancelled);
    CHECK(stop.polls == 3);
  }
  CHECK(model_kl(eval, m) == 0.0);  // and without a stop, as before
}

TEST_CASE("stop: run_units delivers only whole units and returns normally when stopped part-way", "[stop]") {
  const Study study = st_study();
  const std::vector<UnitId> units = enumerate_units(study);
  std::vector<std::size_t> todo(units.size());
  for (std::size_t i = 0; i < todo.size(); ++i) todo[i] = i;

  std::vector<std::vector<RunRecord>> reference(units.size());
  RunnerHooks all;
  all.on_unit = [&](std::size_t i, std::vector<RunRecord>&& rows) { reference[i] = std::move(rows); };
  run_units(study, units, todo, 2, all);

  // The stop turns on while the second unit is being computed (after 1 delivered unit and a few
  // more polls), so that unit is abandoned mid-fit.
  std::atomic<int> delivered{0}, polls_after{0};
  std::vector<std::vector<RunRecord>> got(units.size());
  RunnerHooks hooks;
  hooks.on_unit = [&](std::size_t i, std::vector<RunRecord>&& rows) {
    got[i] = std::move(rows);
    ++delivered;
  };
  hooks.stop_requested = [&] { return delivered >= 1 && ++polls_after > 5; };
  REQUIRE_NOTHROW(run_units(study, units, todo, 1, hooks));
  CHECK(delivered == 1);
  CHECK(polls_after > 5);  // the stop was seen inside a unit, not only between units
  for (std::size_t i = 0; i < units.size(); ++i) {
    if (got[i].empty()) continue;
    REQUIRE(got[i].size() == reference[i].size());  // a delivered unit is whole and the same
    for (std::size_t r = 0; r < got[i].size(); ++r) {
      CHECK(got[i][r].loglik == reference[i][r].loglik);
      CHECK(got[i][r].model_kl == reference[i][r].model_kl);
    }
  }
}

TEST_CASE("planner: a reward of 1e308 is refused, never a crash; NaN values still choose a valid action", "[stop][planner]") {
  // Found with a model whose rewards held 1e308: alpha vectors overflowed to inf, b . alpha was
  // 0 x inf = NaN, no action compared as best and the exact evaluation indexed transitions[INT_MAX].
  Pomdp m = test::random_pomdp(3, 2, 2, 4, 1.0, 3);
  m.rewards(1) = 1e308;
  PlannerSettings p;
  CHECK_THROWS_AS(plan(m, p, StreamKey{1, 0, 0, 0}), std::invalid_argument);
  m.rewards(1) = 1e100;  // the largest a model file may hold: finite values all the way
  const Plan ok = plan(m, p, StreamKey{1, 0, 0, 0});
  const PolicyValue v = plan_value(m, m, ok, p, StreamKey{1, 0, 0, 0});
  CHECK(std::isfinite(v.mean));

  Plan nan = ok;
  for (auto& a : nan.alpha) a.setConstant(std::nan(""));
  const double b[3] = {0.2, 0.3, 0.5};
  const int act = choose_action(nan, 0, b);
  CHECK((act >= 0 && act < m.actions));
  // A non-finite V* - V_uniform is no scale for the gap.
  CHECK_FALSE(normalised_gap(INFINITY, 0.0, 1.0).has_value());
  CHECK_FALSE(normalised_gap(NAN, 0.0, 1.0).has_value());
}
