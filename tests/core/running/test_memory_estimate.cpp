// The memory estimate (src/core/running/memory_estimate.hpp) against a hand count on a tiny case, and its
// scaling with the keys that drive it.
#include <catch2/catch.hpp>

#include <algorithm>

#include <string>

#include "core/running/cost_estimate.hpp"
#include "core/running/memory_estimate.hpp"
#include "core/running/unit.hpp"

using namespace dobudget;

namespace {

// S = 2, A = 2, O = 3, H = 4, Z = 2; pilot [5, 10], logged [0, 20]; T = 7; N = 6; R = 9.
Study me_study(bool return_gap) {
  Study st;
  Scenario sc;
  ScenarioSettings& s = sc.settings;
  s.environment.family = {2, 2, 3, 0.5, 0.3};
  s.environment.horizon = 4;
  s.environment.draws = 3;
  s.replicates = 5;
  s.fit.latent_states = 2;
  s.pilot_budgets = {5, 10};
  s.logged_budgets = {0, 20};
  s.evaluation.trajectories = 7;
  s.planner.belief_points = 6;
  s.planner.rollouts = 9;
  if (return_gap) s.measures = {Measure::model_kl, Measure::return_gap};
  st.scenarios.push_back(sc);
  return st;
}

double part(const std::vector<MemoryPart>& parts, MemoryPartId id) {
  for (const auto& p : parts)
    if (p.id == id) return p.bytes;
  FAIL("no part " << static_cast<int>(id));
  return 0.0;
}

}  // namespace

TEST_CASE("memory estimate: a tiny case counted by hand", "[memory_estimate]") {
  const Study st = me_study(true);
  const std::vector<MemoryPart> parts = unit_memory(st.scenarios[0].settings);
  // Hand count (the formulas of memory_estimate.hpp, evaluated on paper for this case):
  //   datasets: (10 + 20) episodes x (2 x 4 + 1) int32 = 30 x 9 x 4 = 1080
  CHECK(part(parts, MemoryPartId::datasets) == 1080.0);
  //   evaluation: 7 x 9 x 4 = 252 int32 bytes, plus 3 x 7 x 5 x 3 doubles = 315 x 8 = 2520 -> 2772
  CHECK(part(parts, MemoryPartId::evaluation_histories) == 2772.0);
  //   n = Z + A Z^2 + Z O + Z A = 2 + 8 + 6 + 4 = 20 parameters;
  //   fit: 15 x 20 x 8 = 2400; forward-backward workspace per lane (Z 2, A 2, O 3, H 4):
  //   5 x (6 + 3) = 45, 4 x (2 + 1) = 12, 2 + 8 + 6 + 4 + 2 + 1 = 23, 80 doubles x 8 lanes = 640,
  //   selection tables 8 x (4 + 4) = 64: 704 doubles x 8 bytes = 5632 -> 8032
  CHECK(part(parts, MemoryPartId::model_fit) == 8032.0);
  //   fits per unit: pilot-only x {5, 10}, pooled and regime-aware x 20 x {5, 10} = 6 -> 6 x 20 x 8 = 960
  CHECK(fits_per_unit(st.scenarios[0].settings) == 6);
  CHECK(part(parts, MemoryPartId::fitted_models_kept) == 960.0);
  //   plan_bytes(K = 2): 3 x 4 x 6 x 2 x 8 = 1152; workspace (6 (6 + 3 + 2 + 6) + 2 x 6) x 8 = 912;
  //   kstar 6 x 2 x 3 x 4 = 144 -> 2208; plus 3 x 9 rollouts x 8 = 216 -> 2424 (fitted), 2208 (true)
  CHECK(part(parts, MemoryPartId::planner_fitted) == 2424.0);
  CHECK(part(parts, MemoryPartId::planner_true) == 2208.0);

  const MemoryEstimate m = estimate_memory(st, 4);
  const double unit = 1080.0 + 2772.0 + 8032.0 + 960.0 + 2424.0 + 2208.0;
  CHECK(m.unit_bytes == unit);
  CHECK(m.concurrent_units == 4);  // 15 units, 4 threads
  //   results: 15 units x (3 strategies x 2 logged x 2 pilot = 12 rows) x bytes_per_row
  CHECK(m.results.bytes == 15.0 * 12.0 * bytes_per_row());
  CHECK(m.peak_bytes == 4.0 * unit + m.results.bytes);
  // More threads than units: only 15 can run at once.
  CHECK(estimate_memory(st, 64).concurrent_units == 15);
  // Without return_gap there is no planner part.
  CHECK(unit_memory(me_study(false).scenarios[0].settings).size() == 4);
}

TEST_CASE("memory estimate: the largest part and the settings it grows with", "[memory_estimate]") {
  Study st = me_study(false);
  st.scenarios[0].settings.pilot_budgets = {5, 10000000};
  st.scenarios[0].settings.environment.horizon = 5000;
  const MemoryEstimate m = estimate_memory(st, 2);
  const MemoryPart big = m.largest();
  CHECK(big.id == MemoryPartId::datasets);
  CHECK(big.bytes == 2.0 * (1e7 + 20) * 10001 * 4);  // two units at once: 800 GB
  CHECK(m.peak_bytes > big.bytes);
  REQUIRE(big.drivers.size() == 3);
  CHECK((big.drivers[0].driver == Driver::pilot_budget && big.drivers[0].value == 1e7));
  CHECK((big.drivers[1].driver == Driver::logged_budget && big.drivers[1].value == 20));
  CHECK((big.drivers[2].driver == Driver::horizon && big.drivers[2].value == 5000));

  // Many units of many rows: the results kept drive it, with the counts that make them.
  Study rows = me_study(false);
  rows.scenarios[0].settings.environment.draws = 1000;
  rows.scenarios[0].settings.replicates = 2000;
  rows.scenarios[0].settings.pilot_budgets.resize(100);
  for (int i = 0; i < 100; ++i) rows.scenarios[0].settings.pilot_budgets[i] = i + 1;
  const MemoryEstimate r = estimate_memory(rows, 2);
  CHECK(r.largest().id == MemoryPartId::results);
  CHECK(r.results.bytes == 2e6 * 3 * 2 * 100 * bytes_per_row());
  const auto value = [&](Driver d) {
    for (const DriverValue& v : r.results.drivers)
      if (v.driver == d) return v.value;
    return -1.0;
  };
  CHECK(value(Driver::scenarios) == 1);
  CHECK(value(Driver::draws) == 1000);
  CHECK(value(Driver::replicates) == 2000);
  CHECK(value(Driver::strategy_count) == 3);
  CHECK(value(Driver::logged_budget_count) == 2);
  CHECK(value(Driver::pilot_budget_count) == 100);
}

TEST_CASE("cost bound: counts in double, never negative, monotone in the budgets", "[cost_estimate]") {
  // Before, budgets.pilot [5, 2147483647] printed -70.2 core-hours (n + L overflowed int).
  Study st = me_study(false);
  st.scenarios[0].settings.pilot_budgets = {5, 2147483647};
  st.scenarios[0].settings.logged_budgets = {0, 2147483647};
  const CostBound big = bound_cost(st, enumerate_units(st));
  CHECK(big.core_seconds > 0.0);
  CHECK(big.max_core_seconds >= big.core_seconds);
  Study small = me_study(false);
  const CostBound few = bound_cost(small, enumerate_units(small));
  CHECK(few.core_seconds > 0.0);
  CHECK(few.core_seconds < big.core_seconds);
  // Half the units (a shard) costs half (there are no per-draw terms without return_gap).
  std::vector<UnitId> half = enumerate_units(small);
  const std::size_t n = half.size();
  half.resize(n / 2);
  CHECK(bound_cost(small, half).core_seconds == Approx(few.core_seconds * static_cast<double>(n / 2) / n));
  // The bound runs every start the fit may run (up to fit.max_restarts) to the cap; the estimate
  // runs fit.restarts starts of min(cap, 100) E-steps: (10 / 3) x (200 / 100) with the defaults.
  const FitSettings& f = small.scenarios[0].settings.fit;
  const double ratio = std::max({static_cast<double>(f.restarts), 4.0, static_cast<double>(f.max_restarts)}) /
                       f.restarts * f.max_iterations / std::min(f.max_iterations, 100);
  CHECK(ratio == Approx(20.0 / 3.0));
  CHECK(few.max_core_seconds == Approx(ratio * few.core_seconds).epsilon(0.01));
}
