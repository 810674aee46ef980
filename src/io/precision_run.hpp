// A range-mode run directory (issue 10; the search: core/answer/precision_search.hpp). The
// directory OUT holds the range study's study.resolved.yaml (which identifies it) and one plain
// run directory per round, OUT/round-1, OUT/round-2, ... (each with its own round study,
// units.journal, runs.csv: `dobudget plan OUT/round-K/study.resolved.yaml` from scratch gives the
// same runs.csv). Round K's units that existed in round K-1 compute only the budgets round K adds
// and take the rest of their rows from round K-1; new draws or replicates compute every budget.
// When the search ends, OUT gets the last round's runs.csv and timings.csv, answer.csv and
// answer.md (from the last round's study), precision.csv (each answer row: met or not, and why)
// and manifest.json with `final_round` (which `answer` and `report` follow: finished_run.hpp).
//
// Resuming: the same command replays the rounds. A finished round is read back from its journal
// (nothing computed), and since the next round is a function of the rows before it, the same
// rounds follow; an interrupted round resumes from its journal like a plain run.
// The cap: each round's cost is estimated from counts before it starts (bound_cost, typical
// iterations: deterministic, never a measured time, so a resumed run makes the same decisions);
// a round that would take the estimated total above precision.max_core_hours (or --max-core-hours)
// is not started, and the answers of the last round run are reported as they are.
// Shards and MPI ranks are refused by `plan` (each round depends on the answers of the one before).
#pragma once
#include <filesystem>
#include <functional>
#include <string>
#include <vector>

#include "core/answer/answer.hpp"
#include "core/answer/precision_search.hpp"
#include "io/run_directory.hpp"

namespace dobudget::io {

struct RoundSummary {
  int round = 0;
  std::vector<int> added;          // pilot budgets this round added
  int draws_scale = 1;
  int replicates_scale = 1;
  std::size_t units = 0;           // units of the round's study
  std::size_t units_resumed = 0;   // found in the round's journal
  long long fits = 0;              // fits this round computes (not taken from the round before)
  double estimated_core_seconds = 0.0;  // bound_cost of those fits (typical iterations)
};

struct PrecisionOutcome {
  bool complete = false;         // the search ended with every round it made finished
  std::size_t units_done = 0;    // of the round in progress when it stopped
  std::size_t units_total = 0;
  std::filesystem::path round_dir;  // that round's directory
  Study final_study;             // the last round's study
  std::vector<RunRecord> rows;   // its rows (canonical order)
  std::vector<AnswerRow> answers;
  std::vector<PrecisionVerdict> verdicts;
  std::vector<RoundSummary> rounds;
  std::string stopped_because;
  double seconds = 0.0;
};

// The estimated core-seconds (bound_cost, typical iterations) of round 1 of a range-mode study.
double first_round_core_seconds(const Study& range_study);

// Runs the rounds (see above) in options.out. `core_hour_cap`: the smaller of
// precision.max_core_hours and --max-core-hours. `on_round` is called after each round has run (or
// been read back). Throws as plan_study does.
PrecisionOutcome plan_precision_study(const Study& range_study, const std::string& resolved_yaml,
                                      const PlanOptions& options, double core_hour_cap,
                                      const std::function<void(const RoundSummary&)>& on_round = {});

// precision.csv: scenario, measure, strategy, logged, needed_pilot, low, high, relative_half_width,
// met, why (one row per answer row).
std::string precision_csv(const std::vector<PrecisionVerdict>& verdicts);

}  // namespace dobudget::io
