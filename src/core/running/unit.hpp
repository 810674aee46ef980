// A unit of work: one (scenario, environment draw, replicate) (docs/design.md, "Seeding and reproducibility"). Running a unit
// simulates its nested pilot and logged data, fits every strategy at every budget, and measures
// each fit against the true environment.
#pragma once
#include <functional>
#include <memory>
#include <vector>

#include "core/world/pomdp.hpp"
#include "core/running/run_record.hpp"
#include "core/world/seeding.hpp"
#include "core/running/settings.hpp"
#include "core/running/stop.hpp"

namespace dobudget {

struct UnitId {
  int scenario = 0;
  int draw = 0;
  int replicate = 0;
  friend bool operator==(const UnitId&, const UnitId&) = default;
};

// Every unit of a study in the canonical order (scenario, draw, replicate): the row order of runs.csv.
std::vector<UnitId> enumerate_units(const Study& study);

// Number of model fits a unit performs (fits whose data coincide are shared: pilot-only ignores
// logged data, and with no logged episodes every strategy is the pilot-only fit; a cell with no
// data at all, pilot budget 0 without logged episodes, is not fitted). In closed form, without
// enumerating the cells (P pilot budgets, P+ of them above 0, k listed strategies other than
// pilot-only, L+ logged budgets above 0):
//   fits = P+ x [pilot-only is listed or 0 is a logged budget] + P x k x L+.
long long fits_per_unit(const ScenarioSettings& s);

struct ReturnGapReference;  // return_gap.hpp

// What every replicate of one environment draw shares.
struct DrawContext {
  Environment environment;
  std::shared_ptr<const ReturnGapReference> return_gap;  // null unless return_gap is measured
};

// `stop` (stop.hpp) is polled throughout; a requested stop throws Cancelled and nothing is returned.
DrawContext make_draw_context(const Study& study, int scenario, int draw, const StopToken& stop = {});

// The note of a cell with no data at all (pilot budget 0 and no logged episodes used, e.g.
// pilot-only at pilot 0): nothing is fitted, loglik is 0 (log 1), iterations 0, not converged,
// and every measure is +infinity (a failure for every target; answer.hpp).
inline constexpr const char* kNoData = "no data: nothing fitted";

// Runs one unit. Rows come in the order strategy (as listed in the settings), logged budget,
// pilot budget. `stop` is polled in every long loop (fits, model_kl, planner, rollouts): a unit
// that is stopped throws Cancelled and returns no rows, so no partial unit can be recorded.
std::vector<RunRecord> run_unit(const Study& study, const UnitId& unit, const DrawContext& context,
                                const StopToken& stop = {});

}  // namespace dobudget
