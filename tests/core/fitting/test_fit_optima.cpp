// Fits that do not depend on luck (issue 14): on a model where the loggers always take the same
// action, EM with few random starts often stopped at the symmetric fixed point where both latent
// values emit alike (about 700 nats below the best optimum, "converged"), and the needed pilot
// budget came out about twice what 20 starts gave. These tests build a model of that shape and
// check that the default fit settings (restarts 3, max_restarts 10: fit.hpp) answer like 20 starts.
#include <catch2/catch.hpp>

#include <cmath>
#include <vector>

#include "core/answer/answer.hpp"
#include "core/running/unit.hpp"

using namespace dobudget;

namespace {

// 2 hidden states, 2 actions, 2 observations, horizon 2 (numbers chosen here); the logger always
// takes action 0, so the logged episodes say nothing about action 1.
Environment one_action_environment() {
  Environment env;
  Pomdp& m = env.model;
  m.states = 2;
  m.actions = 2;
  m.observations = 2;
  m.horizon = 2;
  m.initial.resize(2);
  m.initial << 0.6, 0.4;
  Matrix stay(2, 2), swap(2, 2);
  stay << 0.85, 0.15, 0.25, 0.75;
  swap << 0.30, 0.70, 0.80, 0.20;
  m.transitions = {stay, swap};
  m.emissions.resize(2, 2);
  m.emissions << 0.85, 0.15, 0.20, 0.80;
  m.rewards.resize(2);
  m.rewards << 1.0, 0.0;
  env.logging_policy.resize(2, 2);
  env.logging_policy << 1.0, 0.0, 1.0, 0.0;
  return env;
}

Study one_action_study(int restarts, int replicates) {
  Study st;
  st.name = "one-action";
  st.seed = 14;
  Scenario sc;
  ScenarioSettings& s = sc.settings;
  s.environment.given = one_action_environment();
  s.environment.horizon = 2;
  s.logged_budgets = {2000};
  s.pilot_budgets = {10, 20, 40, 80, 160, 320, 640};
  s.replicates = replicates;
  s.strategies = {Strategy::regime_aware};
  s.measures = {Measure::model_kl};
  s.fit.latent_states = 2;
  s.fit.restarts = restarts;
  s.targets = {{Measure::model_kl, 0.01}};
  st.scenarios.push_back(sc);
  return st;
}

std::vector<RunRecord> run_study(const Study& st) {
  const DrawContext ctx = make_draw_context(st, 0, 0);
  std::vector<RunRecord> rows;
  for (const auto& u : enumerate_units(st)) {
    auto r = run_unit(st, u, ctx);
    rows.insert(rows.end(), r.begin(), r.end());
  }
  return rows;
}

}  // namespace

TEST_CASE("fit: with the default settings, a model whose loggers never try one action gets the 20-start answer",
          "[fit][optima]") {
  // Before issue 14 (restarts 3, one fixed count of random starts, a relative stopping rule) the same
  // study answered 104 pilot episodes against 29 [16, 92] with 20 starts (dobudget plan on this
  // model, 20 replicates), and 6 of 40 fits at 640 pilot episodes ended ~700 nats low in the
  // issue's own run.
  const Study defaults = one_action_study(FitSettings{}.restarts, 20);
  const Study twenty = one_action_study(20, 20);
  const auto rows = run_study(defaults);
  const auto ref_rows = run_study(twenty);
  const ScenarioSettings& s = defaults.scenarios[0].settings;
  const auto queries = default_queries(s);
  const auto a = compute_answers(rows, 0, s, queries, defaults.seed);
  const auto b = compute_answers(ref_rows, 0, twenty.scenarios[0].settings, queries, twenty.seed);
  REQUIRE(a.size() == 1);
  REQUIRE(b.size() == 1);
  INFO("default settings: needed " << a[0].needed_pilot << " [" << a[0].low << ", " << a[0].high << "]; 20 starts: "
                                   << b[0].needed_pilot << " [" << b[0].low << ", " << b[0].high << "]");
  CHECK(a[0].needed_pilot >= b[0].low);
  CHECK(a[0].needed_pilot <= b[0].high);

  // At the largest budget no fit ends more than 1 nat per 1000 observations below the 20-start fit
  // of the same data (the failure threshold of DEVELOPERS.md, "Restarts and local optima"); compared
  // on the training log-likelihood that runs.csv records.
  REQUIRE(rows.size() == ref_rows.size());
  const double observations = (2000.0 + 640.0) * 3.0;
  int compared = 0, unconfirmed = 0;
  for (std::size_t i = 0; i < rows.size(); ++i) {
    REQUIRE(rows[i].replicate == ref_rows[i].replicate);
    REQUIRE(rows[i].pilot == ref_rows[i].pilot);
    unconfirmed += rows[i].confirmed ? 0 : 1;
    if (rows[i].pilot != 640) continue;
    ++compared;
    INFO("replicate " << rows[i].replicate << ": loglik " << rows[i].loglik << " against " << ref_rows[i].loglik
                      << " with 20 starts; " << rows[i].starts << " starts");
    CHECK(rows[i].loglik >= ref_rows[i].loglik - observations / 1000.0);
    CHECK(rows[i].converged);
    CHECK(rows[i].starts >= 2);
  }
  CHECK(compared == 20);
  CHECK(unconfirmed == 0);  // every fit's best optimum was reached by two starts
}
