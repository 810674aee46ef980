// The rows a run of a study must hold (io/expected_rows.hpp), unit by unit: a journal record is
// accepted only with exactly its unit's rows, in order, with the measures the scenario takes.
#include <catch2/catch.hpp>

#include "core/running/unit.hpp"
#include "io/expected_rows.hpp"
#include "io/study_file.hpp"
#include "../core/run_records.hpp"

using namespace dobudget;
using dobudget::test::make_record;

namespace {

const char* study_text = R"(name: expected-rows-test
environment: { states: 2, actions: 2, observations: 2, horizon: 3, draws: 2 }
budgets: { logged: [0, 20], pilot: [5, 10] }
replicates: 3
strategies: [pilot-only, regime-aware]
measures: [model_kl, return_gap]
targets: { model_kl: 0.05 }
)";

// The rows of unit (0, draw, replicate) as run_unit orders them: strategy, logged, pilot.
std::vector<RunRecord> rows_of(int draw, int replicate) {
  std::vector<RunRecord> rows;
  for (Strategy st : {Strategy::pilot_only, Strategy::regime_aware})
    for (int logged : {0, 20})
      for (int pilot : {5, 10}) rows.push_back(make_record(0, draw, replicate, st, logged, pilot, 0.1, 0.2));
  return rows;
}

}  // namespace

TEST_CASE("expected rows: a unit's own rows pass; any other set, order or measure does not", "[io][expected_rows]") {
  const Study study = io::parse_study(study_text, "expected.yaml");
  const std::vector<UnitId> units = enumerate_units(study);
  REQUIRE(units.size() == 6);
  REQUIRE(units[4] == UnitId{0, 1, 1});
  CHECK(io::rows_per_unit(study.scenarios[0].settings) == 8);
  CHECK(io::unit_rows_problem(study, units, 4, rows_of(1, 1)).empty());

  CHECK_THAT(io::unit_rows_problem(study, units, 3, rows_of(1, 1)), Catch::Contains("replicate is wrong"));
  CHECK_THAT(io::unit_rows_problem(study, units, 6, rows_of(1, 1)), Catch::Contains("units 0 to 5 only"));
  auto rows = rows_of(1, 1);
  std::swap(rows[2], rows[3]);  // the right set, out of order
  CHECK_THAT(io::unit_rows_problem(study, units, 4, rows), Catch::Contains("row 3"));
  rows = rows_of(1, 1);
  rows[5] = rows[4];  // one row twice, another missing
  CHECK_THAT(io::unit_rows_problem(study, units, 4, rows), Catch::Contains("row 6"));
  rows = rows_of(1, 1);
  rows.pop_back();
  CHECK_THAT(io::unit_rows_problem(study, units, 4, rows), Catch::Contains("it has 7 rows") && Catch::Contains("has 8"));
  rows = rows_of(1, 1);
  rows[0].strategy = Strategy::pooled;  // a strategy the scenario does not run
  CHECK_THAT(io::unit_rows_problem(study, units, 4, rows), Catch::Contains("strategy is wrong"));
  rows = rows_of(1, 1);
  rows[1].model_kl.reset();
  CHECK_THAT(io::unit_rows_problem(study, units, 4, rows), Catch::Contains("model_kl is empty"));
  rows = rows_of(1, 1);
  rows[1].return_gap.reset();  // empty return_gap: only with a note saying why
  CHECK_THAT(io::unit_rows_problem(study, units, 4, rows), Catch::Contains("return_gap is empty without a note"));
  rows[1].note = "no room for planning";
  CHECK(io::unit_rows_problem(study, units, 4, rows).empty());
}
