// Writers for the answer (docs/design.md, "The answer"; docs/run-directory.md): answer.csv, answer.md and a terminal table.
//
// answer.csv columns (the design fixes the first ten; later ones are appended, never reordered):
//   scenario,measure,target,assurance,strategy,logged,needed_pilot,low,high,status,
//   floor,saved_vs_pilot_only,exchange_rate,pairs,criterion,draws,unconfirmed,pilot_policy
// Numbers are written with fmt "{}": the shortest decimal that reads back to the same double
// (so a parse round-trips exactly); infinities as "inf" / "-inf"; missing values (std::nullopt
// or NaN: e.g. the assurance under the mean criterion, needed_pilot when not-reached, the
// interval without bootstrap) as empty cells. No quoting is needed: no field contains a comma, and
// no field holds user text (scenarios are given by index; measure, strategy, status and criterion
// are the program's own names). A text column added later must be quoted by RFC 4180 (Shafranovich 2005, section 2).
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

#include "core/answer/answer.hpp"
#include "core/running/settings.hpp"

namespace dobudget::io {

// The header line of answer.csv, without the newline.
std::string_view answer_csv_header();

// One CSV line (without the newline) for one row.
std::string answer_csv_line(const AnswerRow& row);

void write_answer_csv(const std::filesystem::path& path, const std::vector<AnswerRow>& rows);

// What the readable tables show (answer.md, the terminal; answer.csv keeps every row): pilot-only
// once per scenario and query, with logged shown as "any", when its answers at every logged budget
// agree (it ignores logged data, so they do); and no other strategy at logged budget 0 whose answer
// is pilot-only's (with no logged episodes it is the pilot-only fit). `logged` is the logged cell
// shown for each row; `left_out` counts the rows left out.
struct ReadableAnswers {
  std::vector<AnswerRow> rows;
  std::vector<std::string> logged;
  int left_out = 0;
};
ReadableAnswers readable_answers(const std::vector<AnswerRow>& rows);
// The line that says so, when left_out > 0.
std::string_view readable_answers_note();

// A readable page: one table per scenario and query (measure, target, assurance, criterion), the
// criterion stated, the statuses explained, and the caution paragraph. scenario_labels[i] labels
// scenario i (e.g. "logging.privilege=0.5"); missing or empty labels are left out. The study name
// and the labels are user text, shown literally (markdown_text: text_escape.hpp).
std::string format_answer_md(const std::string& study_name, const std::vector<std::string>& scenario_labels,
                             const std::vector<AnswerRow>& rows);
void write_answer_md(const std::filesystem::path& path, const std::string& study_name,
                     const std::vector<std::string>& scenario_labels, const std::vector<AnswerRow>& rows);

// A plain-text table with aligned columns, one line per row, for printing on a terminal.
// Without a study, scenarios are shown by index. With a study that sweeps keys, one column per
// swept key shows its value, and a second table gives the worst case over the swept scenarios for
// each query, strategy and logged budget (the plan to budget for when the swept quantity is
// unknown). Keys, values and labels are shown through printable_line (text_escape.hpp): no
// control character reaches the terminal.
std::string format_answer_table(const std::vector<AnswerRow>& rows, const Study* study = nullptr);

// The worst case over scenarios: for each (measure, target, assurance, criterion, strategy,
// logged), the row with the largest needed_pilot (an unknown need, NaN, counts as the worst).
std::vector<AnswerRow> worst_case_over_scenarios(const std::vector<AnswerRow>& rows);

}  // namespace dobudget::io

namespace dobudget::io {

// The needed pilot budget and the interval as the readable tables show them (rounded up to whole
// episodes; "<= n" below the smallest simulated budget, "inf", "> largest budget"), for the
// report's methods paragraph.
std::string needed_text(const AnswerRow& row);
std::string interval_text(const AnswerRow& row);

// answer.csv and answer.md of a run directory, for every scenario of `study`.
void write_answer_files(const std::filesystem::path& dir, const Study& study, const std::vector<AnswerRow>& rows);

}  // namespace dobudget::io
