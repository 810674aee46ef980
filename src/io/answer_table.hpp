// Writers for the answer (design.md sec. 5 and 7): answer.csv, answer.md and a terminal table.
//
// answer.csv columns (the design fixes the first ten; later ones are appended, never reordered):
//   scenario,measure,target,assurance,strategy,logged,needed_pilot,low,high,status,
//   floor,saved_vs_pilot_only,exchange_rate,pairs,criterion,unconfirmed
// Numbers are written with fmt "{}": the shortest decimal that reads back to the same double
// (so a parse round-trips exactly); infinities as "inf" / "-inf"; missing values (std::nullopt
// or NaN: e.g. the assurance under the mean criterion, needed_pilot when not-reached, the
// interval without bootstrap) as empty cells. No quoting is needed: no field contains a comma.
// pandas.read_csv reads the file as is ("inf" parses as infinity, empty cells as NaN).
//
// Same conventions as io/csv.hpp (whose csv_number this uses).
// Every file is written to a temporary name in the same directory and renamed into place, so a
// reader never sees a half-written file.
#pragma once
#include <filesystem>
#include <string>
#include <string_view>
#include <vector>

#include "core/answer.hpp"
#include "core/settings.hpp"

namespace dobudget::io {

// The header line of answer.csv, without the newline.
std::string_view answer_csv_header();

// One CSV line (without the newline) for one row.
std::string answer_csv_line(const AnswerRow& row);

void write_answer_csv(const std::filesystem::path& path, const std::vector<AnswerRow>& rows);

// A readable page: one table per scenario and query (measure, target, assurance, criterion), the
// criterion stated, the statuses explained, and the caution paragraph. scenario_labels[i] labels
// scenario i (e.g. "logging.privilege=0.5"); missing or empty labels are left out.
std::string format_answer_md(const std::string& study_name, const std::vector<std::string>& scenario_labels,
                             const std::vector<AnswerRow>& rows);
void write_answer_md(const std::filesystem::path& path, const std::string& study_name,
                     const std::vector<std::string>& scenario_labels, const std::vector<AnswerRow>& rows);

// A plain-text table with aligned columns, one line per row, for printing on a terminal.
// Without a study, scenarios are shown by index. With a study that sweeps keys, one column per
// swept key shows its value, and a second table gives the worst case over the swept scenarios for
// each query, strategy and logged budget (the plan to budget for when the swept quantity is
// unknown).
std::string format_answer_table(const std::vector<AnswerRow>& rows, const Study* study = nullptr);

// The worst case over scenarios: for each (measure, target, assurance, criterion, strategy,
// logged), the row with the largest needed_pilot (an unknown need, NaN, counts as the worst).
std::vector<AnswerRow> worst_case_over_scenarios(const std::vector<AnswerRow>& rows);

}  // namespace dobudget::io

namespace dobudget::io {

// answer.csv and answer.md of a run directory, for every scenario of `study`.
void write_answer_files(const std::filesystem::path& dir, const Study& study, const std::vector<AnswerRow>& rows);

}  // namespace dobudget::io
