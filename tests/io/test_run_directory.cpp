// plan_study's executor hooks (io/run_directory.hpp): units delivered as batches of journal records
// (ExecutorHooks::on_records, the MPI executor's path for a worker's RESULT) give the same run
// directory as units delivered one by one (on_unit, the threaded runner's path): runs.csv byte for
// byte, every unit journaled once, progress counted by the batch.
#include <catch2/catch.hpp>

#include <algorithm>
#include <vector>

#include "core/running/runner.hpp"
#include "io/atomic_file.hpp"
#include "io/journal.hpp"
#include "io/run_directory.hpp"
#include "io/study_file.hpp"
#include "temp_dir.hpp"

namespace fs = std::filesystem;
using namespace dobudget;

namespace {

// 2 draws x 3 replicates = 6 units of 3 strategies x 2 logged x 2 pilot = 12 rows; a fraction of a second.
const char* study_text = R"(name: run-directory-test
seed: 5
environment: { states: 2, actions: 2, observations: 2, horizon: 3, draws: 2 }
budgets: { logged: [0, 20], pilot: [5, 10] }
replicates: 3
fit: { restarts: 1, max_iterations: 10 }
evaluation: { trajectories: 20 }
targets: { model_kl: 0.05 }
)";

}  // namespace

TEST_CASE("run directory: units delivered as batches of journal records give the runs.csv of units delivered one "
          "by one",
          "[io][run_directory][batch]") {
  test::TempDir tmp("dobudget_test_run_directory");
  const Study study = io::parse_study(study_text, tmp.path() / "study.yaml");
  const std::string resolved = io::resolved_yaml(study);

  io::PlanOptions one_by_one;
  one_by_one.out = tmp.path() / "one-by-one";
  one_by_one.threads = 1;
  const io::PlanOutcome reference = io::plan_study(study, resolved, one_by_one);
  REQUIRE(reference.complete);

  // As the MPI executor delivers a worker's units: computed elsewhere, encoded by Journal::record,
  // sent as one text, checked and decoded by parse_batch, then on_records. Batches of 4 and 2.
  io::PlanOptions batched;
  batched.out = tmp.path() / "batched";
  batched.threads = 1;
  std::vector<std::size_t> progress_done;
  batched.on_progress = [&](const io::Progress& p) { progress_done.push_back(p.done); };
  batched.executor = [&](const Study& s, const std::vector<UnitId>& units, const std::vector<std::size_t>& todo,
                         int threads, const io::ExecutorHooks& hooks) {
    std::vector<std::pair<std::size_t, std::vector<RunRecord>>> finished;
    RunnerHooks collect;
    collect.on_unit = [&](std::size_t i, std::vector<RunRecord>&& rows) { finished.emplace_back(i, std::move(rows)); };
    run_units(s, units, todo, threads, collect);
    REQUIRE(finished.size() == 6);
    std::string first, second;
    for (std::size_t k = 0; k < finished.size(); ++k)
      (k < 4 ? first : second) += io::Journal::record(finished[k].first, finished[k].second);
    hooks.on_records(io::Journal::parse_batch(first, "test batch 1"));
    hooks.on_records(io::Journal::parse_batch(second, "test batch 2"));
  };
  const io::PlanOutcome outcome = io::plan_study(study, resolved, batched);
  REQUIRE(outcome.complete);
  CHECK(outcome.units_done == 6);
  CHECK(progress_done == std::vector<std::size_t>{4, 6});  // counted by the batch
  CHECK(io::read_file(batched.out / "runs.csv") == io::read_file(one_by_one.out / "runs.csv"));
  const std::string journal = io::read_file(batched.out / "units.journal");
  CHECK(std::count(journal.begin(), journal.end(), '\n') == 7);  // the header and 6 records

  // The journal written in batches resumes like any other: nothing left to compute.
  io::PlanOptions resumed = batched;
  resumed.executor = [](const Study&, const std::vector<UnitId>&, const std::vector<std::size_t>& todo, int,
                        const io::ExecutorHooks&) { CHECK(todo.empty()); };
  const io::PlanOutcome again = io::plan_study(study, resolved, resumed);
  CHECK(again.units_resumed == 6);
  CHECK(io::read_file(resumed.out / "runs.csv") == io::read_file(one_by_one.out / "runs.csv"));
}
