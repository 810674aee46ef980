// The rows a run of a study must hold (io/expected_rows.hpp), unit by unit: a journal record is
// accepted only with exactly its unit's rows, in order, with the measures the scenario takes.
#include <catch2/catch.hpp>

#include "core/running/unit.hpp"
#include "io/expected_rows.hpp"
#include "io/input_error.hpp"
#include "io/journal.hpp"
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

// Rank 0 of an MPI run checks a worker's RESULT with Journal::parse_batch and this check, as resume
// reads the journal (src/mpi/mpi_executor.cpp): a record with one row missing or of another unit
// is refused before anything of the batch could be journaled, naming the record.
TEST_CASE("expected rows: an MPI batch whose record is not its unit's is refused whole", "[io][expected_rows]") {
  const Study study = io::parse_study(study_text, "expected.yaml");
  const std::vector<UnitId> units = enumerate_units(study);
  const io::Journal::RecordCheck check = [&](std::size_t index, const std::vector<RunRecord>& rows) {
    return io::unit_rows_problem(study, units, index, rows);
  };
  const std::string good = io::Journal::record(3, rows_of(1, 0)) + io::Journal::record(4, rows_of(1, 1));
  CHECK(io::Journal::parse_batch(good, "MPI result from rank 1", check).units.size() == 2);

  auto short_rows = rows_of(1, 1);
  short_rows.pop_back();  // 7 of the unit's 8 rows, each intact and of the right unit
  const std::string missing = io::Journal::record(3, rows_of(1, 0)) + io::Journal::record(4, short_rows);
  try {
    io::Journal::parse_batch(missing, "MPI result from rank 1", check);
    FAIL("a record of 7 of 8 rows was accepted");
  } catch (const io::InputError& e) {
    CHECK(e.line == 2);
    CHECK_THAT(e.message, Catch::Contains("it has 7 rows") && Catch::Contains("nothing of this batch is recorded"));
  }
  auto wrong_key = rows_of(1, 1);
  wrong_key[2].pilot = 20;  // the scenario, draw and replicate are the unit's; the budget is not
  try {
    io::Journal::parse_batch(io::Journal::record(4, wrong_key), "MPI result from rank 1", check);
    FAIL("a record with a wrong budget was accepted");
  } catch (const io::InputError& e) {
    CHECK_THAT(e.message, Catch::Contains("row 3") && Catch::Contains("pilot is wrong"));
  }
}
