// Tests of one unit of work (src/core/running/unit.hpp, docs/design.md, "Seeding and reproducibility"): determinism, nested data, and
// sizes at the edges.
#include <catch2/catch.hpp>

#include <algorithm>
#include <optional>
#include <cmath>
#include <string>
#include <tuple>
#include <vector>

#include "core/running/cost_estimate.hpp"
#include "core/world/dataset.hpp"
#include "core/fitting/fit.hpp"
#include "core/measures/model_kl.hpp"
#include "core/world/seeding.hpp"
#include "core/running/settings.hpp"
#include "core/world/synthetic.hpp"
#include "core/running/unit.hpp"

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
  // docs/design.md, "Seeding and reproducibility": every stream is seeded from (study seed, scenario, draw, replicate, purpose), so the
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
  // docs/design.md, "Seeding and reproducibility": pilot (and logged) data for a smaller budget are the first episodes of the
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
  // (docs/design.md, "model_kl", KL of identical distributions) and every log-likelihood is log 1 = 0.
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
  // belief, so the KL is exactly 0 (docs/design.md, "model_kl"), and a KL is never negative.
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

// fits_per_unit (unit.hpp) is a closed form; the reference is what run_unit actually shares: rows
// of one fit carry the same fit (log-likelihood, iterations and the fit's measured seconds), rows of
// different fits differ in the log-likelihood (different data or model). For every subset of the
// strategies and logged lists with and without 0, the closed forms of fits_per_unit and
// observations_per_unit (cost_estimate.hpp) equal the distinct fits of run_unit's rows and the
// observations those fits saw (a fit of pilot-only or logged 0 sees n pilot episodes, else n + L).
TEST_CASE("unit: fits_per_unit and observations_per_unit in closed form count the fits run_unit shares", "[unit]") {
  const std::vector<std::vector<Strategy>> strategy_sets{
      {Strategy::pilot_only},
      {Strategy::pooled},
      {Strategy::regime_aware},
      {Strategy::pilot_only, Strategy::pooled},
      {Strategy::regime_aware, Strategy::pilot_only},
      {Strategy::pooled, Strategy::regime_aware},
      {Strategy::pilot_only, Strategy::pooled, Strategy::regime_aware}};
  const std::vector<std::vector<int>> logged_sets{{0}, {0, 15}, {15}, {10, 25}, {0, 10, 25}};
  for (const auto& strategies : strategy_sets)
    for (const auto& logged : logged_sets) {
      Study st = un_study(2, 2, 2, 3, 2);
      ScenarioSettings& s = st.scenarios[0].settings;
      s.strategies = strategies;
      s.logged_budgets = logged;
      s.pilot_budgets = {4, 9};
      s.fit.restarts = 1;
      s.fit.max_iterations = 5;
      s.evaluation.trajectories = 5;
      const std::vector<RunRecord> rows = run_unit(st, {0, 0, 0}, make_draw_context(st, 0, 0));
      // Distinct fits, each with the episodes its data holds.
      std::vector<std::tuple<double, int, double>> fits;
      double episodes = 0.0;
      for (const RunRecord& r : rows) {
        const std::tuple<double, int, double> id{r.loglik, r.iterations, r.fit_seconds};
        if (std::find(fits.begin(), fits.end(), id) != fits.end()) continue;
        fits.push_back(id);
        episodes += r.pilot + (r.strategy == Strategy::pilot_only ? 0 : r.logged);
      }
      INFO("strategies " << strategies.size() << ", logged budgets " << logged.size() << " from " << logged.front());
      CHECK(fits_per_unit(s) == static_cast<long long>(fits.size()));
      CHECK(observations_per_unit(s) == episodes * (s.environment.horizon + 1));
    }
}

TEST_CASE("unit: fits_per_unit counts 10^5 x 10^5 budgets at once, in 64 bits", "[unit]") {
  // Before, a std::map of strategies x logged x pilot keys was filled (3 x 10^10 here: gigabytes,
  // then std::bad_alloc), and the count, returned as int, would wrap.
  ScenarioSettings s;
  s.pilot_budgets.resize(100000);
  s.logged_budgets.resize(100000);
  for (int i = 0; i < 100000; ++i) s.pilot_budgets[i] = i + 1, s.logged_budgets[i] = i;  // logged from 0
  // 10^5 pilot-only fits (shared by logged 0), and 2 strategies x (10^5 - 1) logged x 10^5 pilot.
  CHECK(fits_per_unit(s) == 100000LL + 2LL * 99999 * 100000);
  // Sum of pilot budgets S_P = 10^5 (10^5 + 1) / 2, of logged L+ = 99999 x 10^5 / 2 (exact in double).
  const double SP = 5000050000.0, SL = 4999950000.0;
  CHECK(observations_per_unit(s) == (SP + 2.0 * (99999.0 * SP + 100000.0 * SL)) * (s.environment.horizon + 1));
}

TEST_CASE("unit: paired scenarios — a logging.privilege sweep shares worlds, pilot data and pilot-only fits",
          "[unit][paired]") {
  // seeding.hpp (unit_stream_key): every scenario of a sweep uses the same streams. pilot-only
  // ignores the logged data, and the privilege enters nothing but the logger, so its rows must be
  // identical in every field of runs.csv but the scenario; the regime-aware rows, which fit the
  // logged data, must differ (the test can fail both ways).
  Study st = un_study(3, 2, 3, 4, 3);
  st.scenarios[0].settings.environment.draws = 2;
  st.scenarios[0].settings.logging.privilege = 0.5;
  Scenario other = st.scenarios[0];
  other.index = 1;
  other.settings.logging.privilege = 0.95;
  st.scenarios.push_back(other);
  int pilot_only_rows = 0, differing_logged_rows = 0;
  for (int d = 0; d < 2; ++d) {
    const DrawContext c0 = make_draw_context(st, 0, d), c1 = make_draw_context(st, 1, d);
    CHECK(c0.environment.model.transitions[0] == c1.environment.model.transitions[0]);  // the same world
    CHECK(c0.environment.model.emissions == c1.environment.model.emissions);
    CHECK(c0.environment.logging_policy != c1.environment.logging_policy);  // another logger
    for (int r = 0; r < 2; ++r) {
      const auto a = run_unit(st, UnitId{0, d, r}, c0), b = run_unit(st, UnitId{1, d, r}, c1);
      REQUIRE(a.size() == b.size());
      for (std::size_t i = 0; i < a.size(); ++i) {
        INFO("draw " << d << " replicate " << r << " row " << i << ": " << name(a[i].strategy) << " logged "
                     << a[i].logged << " pilot " << a[i].pilot);
        CHECK(a[i].scenario == 0);
        CHECK(b[i].scenario == 1);
        RunRecord same = b[i];
        same.scenario = 0;
        if (a[i].strategy == Strategy::pilot_only || a[i].logged == 0) {
          CHECK(un_same_row(a[i], same));
          ++pilot_only_rows;
        } else if (a[i].strategy == Strategy::regime_aware && !un_same_row(a[i], same)) {
          ++differing_logged_rows;
        }
      }
    }
  }
  // Per unit: pilot-only at both logged budgets and the other two strategies at logged 0, at both
  // pilot budgets (8 rows); 2 draws x 2 replicates.
  CHECK(pilot_only_rows == 4 * 8);
  CHECK(differing_logged_rows > 0);
}

TEST_CASE("unit: paired scenarios — an observation_noise sweep rescales the same world", "[unit][paired]") {
  // seeding.hpp: the world of each draw comes from the same stream in every scenario; the noise
  // only scales the same Dirichlet draw (synthetic.hpp: E = (1 - noise) onehot + noise D), so the
  // initial distribution, the dynamics and the rewards are identical and E - onehot scales with noise.
  Study st = un_study(3, 2, 3, 4, 3);
  Scenario other = st.scenarios[0];
  other.index = 1;
  other.settings.environment.family.observation_noise = 0.6;
  st.scenarios.push_back(other);
  const Pomdp a = make_draw_context(st, 0, 0).environment.model, b = make_draw_context(st, 1, 0).environment.model;
  CHECK(a.initial == b.initial);
  for (std::size_t k = 0; k < a.transitions.size(); ++k) CHECK(a.transitions[k] == b.transitions[k]);
  CHECK(a.rewards == b.rewards);
  for (int s = 0; s < 3; ++s)
    for (int o = 0; o < 3; ++o) {
      const double one = o == s % 3 ? 1.0 : 0.0;
      CHECK((b.emissions(s, o) - one) == Approx(2.0 * (a.emissions(s, o) - one)).margin(1e-12));
    }
}

TEST_CASE("unit: a pilot budget of 0 fits on logged data alone; pilot-only has no data", "[unit][budget0]") {
  // unit.hpp (kNoData): with no data at all nothing is fitted and every measure is +infinity (a
  // failure for every target); pooled and regime-aware at logged 50 and pilot 0 are real fits of
  // the logged episodes alone, with a finite model_kl and a log-likelihood below 0.
  Study st = un_study(3, 2, 3, 4, 3);
  st.scenarios[0].settings.pilot_budgets = {0, 5};
  const auto rows = un_run(st, 0);
  REQUIRE(rows.size() == 3 * 2 * 2);
  int no_data = 0, logged_only = 0;
  for (const auto& r : rows) {
    INFO(name(r.strategy) << " logged " << r.logged << " pilot " << r.pilot);
    if (r.pilot != 0) {
      CHECK(r.note.empty());
      continue;
    }
    if (r.strategy == Strategy::pilot_only || r.logged == 0) {
      CHECK(r.note == kNoData);
      REQUIRE(r.model_kl);
      CHECK(std::isinf(*r.model_kl));
      CHECK(r.loglik == 0.0);
      CHECK(r.iterations == 0);
      CHECK_FALSE(r.converged);
      ++no_data;
    } else {
      CHECK(r.note.empty());
      REQUIRE(r.model_kl);
      CHECK(std::isfinite(*r.model_kl));
      CHECK(r.loglik < 0.0);
      CHECK(r.iterations > 0);
      ++logged_only;
    }
  }
  CHECK(no_data == 4);      // pilot-only at logged 0 and 50, pooled and regime-aware at logged 0
  CHECK(logged_only == 2);  // pooled and regime-aware at logged 50
  CHECK(fits_per_unit(st.scenarios[0].settings) == 1 + 2 * 2);  // pilot-only at 5 (nothing at 0); 2 strategies x 2 budgets at logged 50
}
