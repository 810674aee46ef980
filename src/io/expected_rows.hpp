// The rows a run of a study must hold (docs/run-directory.md), checked wherever rows come back from a
// file: a journal record on resume and in merge (one unit), runs.csv in `answer` and `report` and
// before `plan` or `merge` writes it (the whole study).
//
// Rule: units come in the canonical order of enumerate_units (scenario, draw, replicate), and the
// rows of a unit in the order strategy (as the scenario lists them), logged budget, pilot budget,
// each exactly once, with the unit's scenario, environment and replicate. A measure's cell holds a
// value exactly when the scenario measures it, except that return_gap may be empty when the note
// says why ("no room for planning").
#pragma once
#include <string>
#include <vector>

#include "core/running/run_record.hpp"
#include "core/running/settings.hpp"
#include "core/running/unit.hpp"

namespace dobudget::io {

// Number of rows of one unit of scenario settings `s`: strategies x logged budgets x pilot budgets.
std::size_t rows_per_unit(const ScenarioSettings& s);

// What is wrong with `rows` as the rows of unit `index` of `units` (the study's enumerate_units),
// or an empty string when nothing is.
std::string unit_rows_problem(const Study& study, const std::vector<UnitId>& units, std::size_t index,
                              const std::vector<RunRecord>& rows);

// Checks every row of a runs.csv (row i on line i + 2 of `source`, as parse_runs reads it) against
// the study: throws InputError(source, line, column, message) at the first row that is missing,
// extra, repeated, out of order, of a scenario, draw, replicate, strategy or budget the study does
// not have, or whose measures disagree with the scenario's.
void check_rows_against_study(const Study& study, const std::vector<RunRecord>& rows, const std::string& source);

}  // namespace dobudget::io
