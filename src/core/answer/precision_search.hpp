// The range mode's search for a needed budget to a stated precision (issue 10): a study that gives
// budgets.pilot as { from, to } and a `precision` is run in rounds. Round 1 simulates a coarse grid
// in log(budget); after each round the answers (answer.hpp) say, row by row, whether the 90%
// interval is within +-relative of the need (meets_precision) and, when it is not, what is
// missing, read from the row as answer.hpp ("relative_half_width") describes:
//   * budgets, when the interval spans simulated budgets too far apart: every gap between
//     neighbouring budgets inside [low, high] whose ratio is above 1 + relative is split in
//     log(budget) into up to 4 parts (a gap that starts at 0 gets its upper end / 2 and / 4);
//   * budgets below the grid, when the criterion is met at the smallest budget: down to 0 when
//     every scenario has logged episodes (else down to 1), and the smallest / 2 and / 4;
//   * budgets above the grid, when the crossing lies beyond the largest budget (extrapolated,
//     unreachable, not-reached), up to budgets.pilot.to;
//   * more draws (synthetic family) or replicates (a given model: one world), when the sampling
//     part of the interval alone is wider than relative / 2: the half-width of a percentile
//     interval falls about as 1/sqrt(pairs), so the factor is (2 x sampling part / relative)^2,
//     from 2 to 4 per round.
// A round adds what every unmet row asks for (budgets are one list for the whole study). The
// search stops when every row meets the precision, when no unmet row can be helped (its crossing
// lies above budgets.pilot.to, the list holds max_budgets budgets, or samples reached their
// limit), after max_search_rounds rounds, or (decided by the caller, from counts: cost_estimate.hpp)
// when the next round would pass precision.max_core_hours.
//
// Each round's study is a plain study (round_study): the budgets so far, each tagged with the
// round that added it (ScenarioSettings::pilot_rounds), and the draws and replicates scaled. A
// budget of n episodes is the first n episodes of a unit's data whatever the largest budget
// (dataset.hpp), and warm starts from a smaller budget come only from the same round (unit.cpp),
// so a row never changes when a later round adds budgets, draws or replicates: running a round's
// study from scratch as a plain study gives exactly the rows the rounds computed piece by piece.
// Everything here is a function of the study and the rows of earlier rounds, so the rounds are
// deterministic and a resumed run makes the same rounds.
#pragma once
#include <string>
#include <vector>

#include "core/answer/answer.hpp"
#include "core/running/settings.hpp"
#include "core/running/unit.hpp"

namespace dobudget {

// The most rounds a range-mode run makes, and the most budgets its list may hold (as a study file's).
inline constexpr int max_search_rounds = 20;
inline constexpr int max_search_budgets = 100;

// Round 1's grid: 5 budgets evenly spaced in log(budget) from `from` to `to`, rounded to whole
// episodes, duplicates dropped (fewer when the range is narrow).
std::vector<int> coarse_grid(const PilotRange& range);

// What one round simulates, for every scenario alike.
struct SearchDesign {
  int round = 1;
  std::vector<int> budgets;  // ascending
  std::vector<int> rounds;   // the round that added each budget (parallel to budgets)
  int draws_scale = 1;       // draws = the study's environment.draws x draws_scale (synthetic family)
  int replicates_scale = 1;  // replicates = the study's replicates x replicates_scale
};

// Round 1 of a range-mode study (study.precision set; every scenario has pilot_range).
SearchDesign first_design(const Study& range_study);

// The plain study a round simulates: no range and no precision, budgets.pilot = design.budgets
// with pilot_rounds, draws and replicates scaled (swept values of environment.draws and replicates
// scaled in the scenario's assignments and label too, so resolved_yaml writes them).
Study round_study(const Study& range_study, const SearchDesign& design);

// Whether unit `u` of `design`'s study already exists in `earlier`'s (the same draw and replicate
// indices), so that it only needs the budgets `design` adds.
bool unit_in_design(const Study& range_study, const SearchDesign& earlier, const UnitId& u);

// The verdict on one answer row.
struct PrecisionVerdict {
  AnswerRow row;
  double half_width = 0.0;  // relative_half_width(row)
  bool met = false;
  std::string why;  // "met", or what is missing and whether the search could add it
};

struct SearchStep {
  std::vector<PrecisionVerdict> verdicts;  // one per answer row, in the answers' order
  bool more = false;                       // another round would help
  SearchDesign next;                       // that round (when more)
};

// The verdicts on `answers` (compute_study_answers of round_study(range_study, current)) and the
// next round. Deterministic.
SearchStep plan_next_round(const Study& range_study, const SearchDesign& current, const std::vector<AnswerRow>& answers);

}  // namespace dobudget
