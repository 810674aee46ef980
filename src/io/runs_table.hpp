// runs.csv and timings.csv (docs/run-directory.md, "runs.csv"). runs.csv is byte-identical across runs of the same
// study (whatever the threads, shards or ranks): it holds no wall-clock figure, and numbers are
// written in the shortest form that reads back to the same double. timings.csv holds the same
// keys with fit_seconds. The design's columns come first; appended after them: `note` (why a
// measure is empty, e.g. "no room for planning"), `starts` (EM starts the fit ran) and `confirmed`
// (1 when a second start reached the best objective; fit.hpp).
//
// Reading treats the text as hostile: every cell is checked for its type and range, and a bad cell
// is an InputError naming the file, the line and the column:
//   runs.csv:14: model_kl: must be at least 0, got -0.3
// Ranges: scenario, environment, replicate, logged, pilot, iterations and starts are integers >= 0;
// strategy is a known strategy; model_kl is empty or a number >= 0 (or inf); return_gap is empty or
// finite, or inf with the note of a cell with no data (unit.hpp, kNoData);
// loglik is a number (not nan); converged and confirmed are 0 or 1; note holds no control character.
// Whether the rows are the ones a study expects is checked by finished_run.hpp.
#pragma once
#include <cstdint>
#include <filesystem>
#include <string>
#include <string_view>
#include <vector>

#include "core/running/run_record.hpp"

namespace dobudget::io {

inline constexpr const char* runs_header =
    "scenario,environment,replicate,strategy,logged,pilot,model_kl,return_gap,loglik,iterations,converged,note,starts,"
    "confirmed";
inline constexpr const char* timings_header = "scenario,environment,replicate,strategy,logged,pilot,fit_seconds";

// A runs.csv (or timings.csv) row is at most a few hundred bytes (six keys, three numbers of at most
// 24 characters, a short note): a file of more than (rows + 1) times this many bytes is not the
// table of those rows, and is refused before it is read.
inline constexpr std::uintmax_t max_row_bytes = 1024;

std::string runs_csv(const std::vector<RunRecord>& rows);
std::string timings_csv(const std::vector<RunRecord>& rows);

// One runs.csv line (no newline) and its inverse. parse_runs_line throws InputError(source, line,
// column, message) on a malformed line or a value out of range (see above). fit_seconds is not
// part of runs.csv.
std::string runs_line(const RunRecord& r);
RunRecord parse_runs_line(std::string_view line, const std::string& source = "runs.csv", int line_number = 0);

// The whole text of a runs.csv: the header, then one row per line (a final LF is optional; no empty
// line inside). Throws only InputError (naming `source`, the 1-based line and the column).
std::vector<RunRecord> parse_runs(const std::string& text, const std::string& source);

// Reads runs.csv (parse_runs) and fit_seconds from timings.csv beside it when present
// (read_fit_seconds).
std::vector<RunRecord> read_runs(const std::filesystem::path& runs_csv_file);

// Sets fit_seconds of `rows` from a timings.csv: its rows must have the keys of `rows`, in the same
// order, and fit_seconds finite and >= 0; else an InputError naming the file and the line. A file
// larger than those rows can fill (max_row_bytes), or not a regular file, is refused unread.
void read_fit_seconds(const std::filesystem::path& timings_csv_file, std::vector<RunRecord>& rows);

}  // namespace dobudget::io
