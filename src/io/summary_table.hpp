// The table `dobudget plan` prints: for each scenario, strategy, logged and pilot budget, the
// mean and spread of each measure over (environment draw, replicate) pairs.
#pragma once
#include <string>
#include <vector>

#include "core/running/run_record.hpp"
#include "core/running/settings.hpp"
#include "core/answer/summary.hpp"

namespace dobudget::io {

// The cells the printed table shows (runs.csv keeps every row): pilot-only once, with logged shown
// as "any", when its figures agree at every logged budget (it ignores logged data, so they do);
// no other strategy at logged budget 0 whose figures are pilot-only's at the same pilot budget
// (with no logged episodes it is the pilot-only fit). `logged` is the logged cell shown for each
// cell; `left_out` counts the cells left out.
struct ReadableCells {
  std::vector<CellSummary> cells;
  std::vector<std::string> logged;
  int left_out = 0;
};
ReadableCells readable_cells(const std::vector<CellSummary>& cells);

// One block per scenario and measure, cells as readable_cells shows them, with one line saying
// what was left out.
std::string format_summary(const Study& study, const std::vector<RunRecord>& rows);

}  // namespace dobudget::io
