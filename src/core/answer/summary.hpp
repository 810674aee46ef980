// Summary of a measure over (environment draw, replicate) pairs for each strategy x logged x
// pilot cell: mean, sample standard deviation, median and the 10% and 90% empirical quantiles
// (Hyndman and Fan, "Sample quantiles in statistical packages", Am. Stat. 50(4), 1996, type 7).
#pragma once
#include <vector>

#include "core/measures/measure.hpp"
#include "core/running/run_record.hpp"

namespace dobudget {

struct CellSummary {
  int scenario = 0;
  Strategy strategy = Strategy::pilot_only;
  int logged = 0;
  int pilot = 0;
  int count = 0;  // pairs with a value
  double mean = 0.0, sd = 0.0, median = 0.0, q10 = 0.0, q90 = 0.0;
};

// Cells in the order they first appear in `rows` (runs.csv order is scenario-major, so within
// a scenario: strategy, logged, pilot as in the settings).
std::vector<CellSummary> summarise(const std::vector<RunRecord>& rows, Measure measure);

double quantile_type7(std::vector<double> values, double p);

}  // namespace dobudget
