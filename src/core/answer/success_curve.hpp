// The raw success fraction (docs/design.md, "Needed pilot episodes") of each strategy x logged x pilot cell: the fraction
// of (environment draw, replicate) pairs whose measure is at most the target. This is the quantity
// the answer makes monotone (isotonic regression) and interpolates; here it is reported as is, per
// budget, for figures and tables. A pure computation on run records: no files.
//
// Counting follows answer.hpp: a missing value (std::nullopt, e.g. return_gap with no room for
// planning) or a NaN is left out of the denominator; +infinity (a model giving an observation
// probability 0) counts as a failure; a value equal to the target is a success. Each run record is
// one pair (runs.csv holds one row per pair and cell).
#pragma once
#include <vector>

#include "core/measures/measure.hpp"
#include "core/running/run_record.hpp"
#include "core/fitting/strategy.hpp"

namespace dobudget {

struct SuccessCell {
  int scenario = 0;
  Strategy strategy = Strategy::pilot_only;
  int logged = 0;
  int pilot = 0;
  int pairs = 0;      // pairs with a value of the measure
  int successes = 0;  // of which the measure is <= target
  double fraction = 0.0;  // successes / pairs; NaN when pairs == 0
};

// Cells in the order they first appear in `rows` (the order of summarise(), summary.hpp).
// Throws std::invalid_argument when the target is NaN.
std::vector<SuccessCell> success_curve(const std::vector<RunRecord>& rows, Measure measure, double target);

// The same, restricted to the records of one scenario (targets may differ between scenarios).
std::vector<SuccessCell> success_curve(const std::vector<RunRecord>& rows, int scenario, Measure measure,
                                       double target);

}  // namespace dobudget
