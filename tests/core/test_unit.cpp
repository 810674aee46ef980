// Tests of one unit of work (src/core/unit.hpp, design.md sec. 6): determinism, nested data, and
// sizes at the edges.
#include <catch2/catch.hpp>

#include <optional>

#include <cmath>
#include <string>
#include <vector>

#include "core/dataset.hpp"
#include "core/fit.hpp"
#include "core/model_kl.hpp"
#include "core/seeding.hpp"
#include "core/settings.hpp"
#include "core/synthetic.hpp"
#include "core/unit.hpp"

using namespace dobudget;

namespace {

// A tiny one-scenario study: replicates 2, logged {0, 50}, pilot {5, 20}, few EM iterations.
Study un_study(int S, int A, int O, int H, int Z, std::uint64_t seed = 11) {
  Study st;
  st.name = "unit-reference";
  st.seed = seed;
  Scenario sc;
  sc.index = 0;
  sc.label = "base";
  ScenarioSettings& s = sc.settings;
  s.environment.family.states = S;
  s.environment.family.actions = A;
  s.environment.family.observations = O;
  s.environment.family.dynamics_concentration = 0.5;
  s.environment.family.observation_noise = 0.3;
  s.environment.horizon = H;
  s.environment.discount = 1.0;
  s.environment.draws = 1;
  s.logged_budgets = {0, 50};
  s.pilot_budgets = {5, 20};
  s.replicates = 2;
  s.strategies = {Strategy::pilot_only, Strategy::pooled, Strategy::regime_aware};
  s.measures = {Measure::model_kl};
  s.fit.latent_states = Z;
  s.fit.restarts = 2;
  s.fit.max_iterations = 15;
  s.fit.tolerance = 1e-6;
  s.fit.prior = 0.1;
  s.evaluation.trajectories = 60;
  st.scenarios.push_back(sc);
  return st;
}

// Every field of runs.csv (fit_seconds is wall clock and lives in timings.csv).
bool un_same_row(const RunRecord& x, const RunRecord& y) {
  return x.scenario == y.scenario && x.environment == y.environment && x.replicate == y.replicate &&
         x.strategy == y.strategy && x.logged == y.logged && x.pilot == y.pilot && x.model_kl == y.model_kl &&
         x.return_gap == y.return_gap && x.loglik == y.loglik && x.iterations == y.iterations &&
         x.converged == y.converged;
}

std::vector<RunRecord> un_run(const Study& st, int replicate) {
  const DrawContext ctx = make_draw_context(st, 0, 0);
  return run_unit(st, UnitId{0, 0, replicate}, ctx);
}

// Rows in the documented order: strategy (as listed), logged budget, pilot budget; every row finite.
void un_check_rows(const Study& st, const std::vector<RunRecord>& rows, int replicate) {
  const ScenarioSettings& s = st.scenarios[0].settings;
  REQUIRE(rows.size() == s.strategies.size() * s.logged_budgets.size() * s.pilot_budgets.size());
  std::size_t k = 0;
  for (Strategy strategy : s.strategies)
    for (int L : s.logged_budgets)
      for (int n : s.pilot_budgets) {
        const RunRecord& r = rows[k++];
        INFO("row " << k - 1 << ": " << name(strategy) << " logged " << L << " pilot " << n);
        CHECK(r.strategy == strategy);
        CHECK(r.logged == L);
        CHECK(r.pilot == n);
        CHECK(r.replicate == replicate);
        REQUIRE(r.model_kl.has_value());
        CHECK(std::isfinite(*r.model_kl));
        CHECK(*r.model_kl >= -1e-12);  // a KL divergence (up to rounding)
        CHECK(std::isfinite(r.loglik));
        CHECK(r.loglik <= 1e-9);  // a log-probability of discrete data
        CHECK(r.iterations >= 0);
        CHECK(r.iterations <= s.fit.max_iterations);
      }
}

}  // namespace

TEST_CASE("unit: run_unit is deterministic", "[unit]") {
  // design.md sec. 6: every stream is seeded from (study seed, scenario, draw, replicate, purpose), so the
  // same unit gives bit-identical rows (runs.csv is byte-identical across runs).
  const Study st = un_study(3, 2, 2, 4, 3);
  for (int replicate : {0, 1}) {
    const auto a = un_run(st, replicate);
    const auto b = un_run(st, replicate);
    un_check_rows(st, a, replicate);
    REQUIRE(a.size() == b.size());
    for (std::size_t i = 0; i < a.size(); ++i) {
      INFO("row " << i);
      CHECK(un_same_row(a[i], b[i]));
    }
  }
  // Different replicates draw different data: at least one row differs (the test can fail).
  const auto r0 = un_run(st, 0), r1 = un_run(st, 1);
  bool any_differ = false;
  for (std::size_t i = 0; i < r0.size(); ++i) any_differ = any_differ || r0[i].loglik != r1[i].loglik;
  CHECK(any_differ);
  // With no logged episodes every strategy is the pilot-only fit (unit.hpp: fits are shared).
  const auto& rows = r0;
  for (std::size_t i = 0; i < rows.size(); ++i)
    for (std::size_t j = 0; j < rows.size(); ++j)
      if (rows[i].logged == 0 && rows[j].logged == 0 && rows[i].pilot == rows[j].pilot) {
        CHECK(rows[i].loglik == rows[j].loglik);
        CHECK(rows[i].model_kl == rows[j].model_kl);
      }
}

TEST_CASE("unit: nested data — a smaller budget is a prefix of the larger one", "[unit]") {
  // design.md sec. 6: pilot (and logged) data for a smaller budget are the first episodes of the
  // largest budget's data.
  const Study st = un_study(3, 2, 3, 5, 3);
  const ScenarioSettings& s = st.scenarios[0].settings;
  const DrawContext ctx = make_draw_context(st, 0, 0);
  const StreamKey key{st.seed, 0, 0, 1};
  for (Regime regime : {Regime::pilot, Regime::logged}) {
    INFO((regime == Regime::pilot ? "pilot" : "logged"));
    const Purpose purpose = regime == Regime::pilot ? Purpose::pilot : Purpose::logged;
    Engine r1 = make_engine(key, purpose), r2 = make_engine(key, purpose);
    const Dataset small = simulate(ctx.environment, regime, 7, r1);
    const Dataset large = simulate(ctx.environment, regime, 40, r2);
    REQUIRE(small.horizon == large.horizon);
    const std::vector<std::int32_t> obs_prefix(large.observations.begin(),
                                               large.observations.begin() + static_cast<std::ptrdiff_t>(small.observations.size()));
    const std::vector<std::int32_t> act_prefix(large.actions.begin(),
                                               large.actions.begin() + static_cast<std::ptrdiff_t>(small.actions.size()));
    CHECK(small.observations == obs_prefix);
    CHECK(small.actions == act_prefix);
  }
  // run_unit fits the smaller pilot budget on that prefix: refitting pilot-only on the first 5 of the
  // 20 pilot episodes with the documented streams (unit.cpp: fit stream sub-keyed by strategy name,
  // logged and pilot budgets) and the documented warm start (the fit at the next smaller pilot
  // budget) gives the same log-likelihood as the row.
  const auto rows = run_unit(st, UnitId{0, 0, 1}, ctx);
  Engine prng = make_engine(key, Purpose::pilot);
  const Dataset pilot = simulate(ctx.environment, Regime::pilot, s.pilot_budgets.back(), prng);
  std::optional<FitResult> smaller;
  for (int n : s.pilot_budgets) {
    Engine frng = make_engine(key, Purpose::fit, combine(combine(name_key("pilot-only"), 0), static_cast<std::uint64_t>(n)));
    std::vector<WarmStart> warm;
    if (smaller) warm.push_back({&smaller->model, &smaller->decision});
    const FitResult f = fit({{&pilot, n, Regime::pilot}}, false, s.fit, ctx.environment.model, frng, warm);
    smaller = f;
    bool found = false;
    for (const auto& r : rows)
      if (r.strategy == Strategy::pilot_only && r.pilot == n && r.logged == 0) {
        found = true;
        CHECK(r.loglik == f.loglik);
        CHECK(r.iterations == f.iterations);
      }
    CHECK(found);
  }
}

TEST_CASE("unit: one state, one action, one observation, horizon 1", "[unit]") {
  // With a single observation every predictive is the point mass on it, so model_kl must be exactly 0
  // (design.md sec. 4, KL of identical distributions) and every log-likelihood is log 1 = 0.
  const Study st = un_study(1, 1, 1, 1, 1);
  const auto rows = un_run(st, 0);
  un_check_rows(st, rows, 0);
  for (const auto& r : rows) {
    INFO(name(r.strategy) << " logged " << r.logged << " pilot " << r.pilot);
    CHECK(r.model_kl.value_or(-1.0) == 0.0);
    CHECK(r.loglik == 0.0);
  }
}

TEST_CASE("unit: one observation with several states and latent values still gives model_kl exactly 0", "[unit]") {
  // Same argument as above: the predictive of the only observation is 1 in every model, whatever the
  // belief, so the KL is exactly 0 (design.md sec. 4), and a KL is never negative.
  // KNOWN FAILURE (reported, not fixed): model_kl.cpp computes the predictive as sum_s b(s) E(s, o) with a
  // belief b that sums to 1 only up to rounding (predict() after condition()), so the "certain" predictive
  // is 1 +- 1 ulp in the truth and in the fit, and model_kl comes out as +-1e-17, sometimes negative.
  for (const auto& [S, Z] : {std::pair{2, 2}, std::pair{3, 2}, std::pair{2, 3}}) {
    INFO("S=" << S << " Z=" << Z);
    const Study st = un_study(S, 2, 1, 3, Z);
    const auto rows = un_run(st, 0);
    for (const auto& r : rows) {
      INFO(name(r.strategy) << " logged " << r.logged << " pilot " << r.pilot << ": model_kl " << r.model_kl.value_or(-1.0));
      CHECK(r.model_kl.value_or(-1.0) >= 0.0);
      CHECK(r.model_kl.value_or(-1.0) == 0.0);
    }
  }
}

TEST_CASE("unit: one action, and latent size different from the true state count", "[unit]") {
  struct Case {
    int S, A, O, H, Z;
  };
  const Case cases[] = {
      {3, 1, 2, 3, 3},  // one action
      {2, 2, 2, 1, 3},  // Z = 3 > S = 2, horizon 1
      {2, 2, 3, 3, 3},  // Z = 3 > S = 2
      {4, 2, 2, 3, 2},  // Z = 2 < S = 4
  };
  for (const Case& c : cases) {
    INFO("S=" << c.S << " A=" << c.A << " O=" << c.O << " H=" << c.H << " Z=" << c.Z);
    const Study st = un_study(c.S, c.A, c.O, c.H, c.Z);
    const auto rows = un_run(st, 1);
    un_check_rows(st, rows, 1);
    const auto again = un_run(st, 1);
    REQUIRE(again.size() == rows.size());
    for (std::size_t i = 0; i < rows.size(); ++i) CHECK(un_same_row(rows[i], again[i]));
  }
}
