// Rounds of the range mode (core/answer/precision_search.hpp) at the level of one unit: the
// first n episodes of a unit's data are the same whatever its largest budget (dataset.hpp), and a
// budget added in a later round (settings.hpp, pilot_rounds) leaves every row of the earlier
// rounds unchanged, so a round's rows are the union of pieces computed separately.
// The reference is the property itself, stated in dataset.hpp and precision_search.hpp: rows
// computed with and without the later budgets must be equal field by field.
#include <catch2/catch.hpp>

#include <map>
#include <tuple>
#include <vector>

#include "core/running/settings.hpp"
#include "core/running/unit.hpp"
#include "core/world/dataset.hpp"
#include "core/world/seeding.hpp"
#include "core/world/synthetic.hpp"

using namespace dobudget;

namespace {

Study rounds_study(std::vector<int> pilot, std::vector<int> rounds) {
  Study st;
  st.name = "rounds";
  st.seed = 21;
  Scenario sc;
  ScenarioSettings& s = sc.settings;
  s.environment.family = {3, 2, 2, 0.3, 0.2};
  s.environment.horizon = 4;
  s.environment.draws = 1;
  s.logged_budgets = {0, 40};
  s.pilot_budgets = std::move(pilot);
  s.pilot_rounds = std::move(rounds);
  s.replicates = 1;
  s.measures = {Measure::model_kl};
  s.fit.latent_states = 3;
  s.fit.restarts = 2;
  s.fit.max_iterations = 25;
  s.evaluation.trajectories = 50;
  st.scenarios.push_back(sc);
  return st;
}

using Cell = std::tuple<Strategy, int, int>;

std::map<Cell, RunRecord> rows_by_cell(const Study& st) {
  const DrawContext ctx = make_draw_context(st, 0, 0);
  std::map<Cell, RunRecord> out;
  for (const RunRecord& r : run_unit(st, UnitId{0, 0, 0}, ctx)) out[{r.strategy, r.logged, r.pilot}] = r;
  return out;
}

bool same_row(const RunRecord& x, const RunRecord& y) {
  return x.model_kl == y.model_kl && x.loglik == y.loglik && x.iterations == y.iterations &&
         x.converged == y.converged && x.starts == y.starts && x.confirmed == y.confirmed && x.note == y.note;
}

}  // namespace

TEST_CASE("rounds: the first n episodes of a unit's data do not depend on its largest budget", "[unit][rounds]") {
  const Study st = rounds_study({5}, {});
  const StreamKey key = unit_stream_key(st.seed, 0, 0, 0);
  const Environment env = make_environment(st.scenarios[0].settings, key);
  Engine a = make_engine(key, Purpose::pilot), b = make_engine(key, Purpose::pilot);
  const Dataset small = simulate(env, Regime::pilot, 7, a);
  const Dataset large = simulate(env, Regime::pilot, 300, b);
  const std::vector<std::int32_t> o(large.observations.begin(), large.observations.begin() + small.observations.size());
  const std::vector<std::int32_t> u(large.actions.begin(), large.actions.begin() + small.actions.size());
  CHECK(o == small.observations);
  CHECK(u == small.actions);
}

TEST_CASE("rounds: budgets added in a later round leave the earlier rounds' rows unchanged", "[unit][rounds]") {
  const auto round1 = rows_by_cell(rounds_study({5, 20}, {1, 1}));
  const auto round2_only = rows_by_cell(rounds_study({10, 40}, {2, 2}));
  const auto both = rows_by_cell(rounds_study({5, 10, 20, 40}, {1, 2, 1, 2}));
  REQUIRE(both.size() == round1.size() + round2_only.size());
  for (const auto& [cell, row] : both) {
    INFO(name(std::get<0>(cell)) << " logged " << std::get<1>(cell) << " pilot " << std::get<2>(cell));
    const auto& piece = std::get<2>(cell) == 5 || std::get<2>(cell) == 20 ? round1 : round2_only;
    REQUIRE(piece.count(cell) == 1);
    CHECK(same_row(row, piece.at(cell)));
  }
  // One round (no tags) is the plain study: the rows of budgets 5 and 20 are those of round 1.
  const auto plain = rows_by_cell(rounds_study({5, 20}, {}));
  for (const auto& [cell, row] : plain) CHECK(same_row(row, round1.at(cell)));
}
