// A finished run directory, loaded for re-analysis (`answer`, `report`) with every check a file
// that travelled between people needs (docs/run-directory.md):
//   1. study.resolved.yaml has the study hash recorded at planning time: manifest.json's
//      study_hash and units.journal's header, whichever are present (an edited copy is refused);
//      a directory where neither records it is refused (plan and merge always write manifest.json);
//   2. it loads as a study (load_study: located errors);
//   3. runs.csv parses cell by cell (parse_runs: type and range of every cell) and holds exactly
//      the study's rows, each once, in order, with the measures the study takes
//      (check_rows_against_study); runs.csv and timings.csv larger than the study's rows can fill
//      are refused unread (max_row_bytes, runs_table.hpp).
// A range-mode directory (precision_run.hpp) is loaded from its last round, round-K with K =
// manifest.json's final_round (after step 1 on the directory itself): `dir` stays the directory
// given, `study` and `rows` are the last round's (a plain study), so answers work as on a plain run.
// Every file is opened as a regular file only (regular_file.hpp): a pipe or a device placed in the
// directory is refused, never waited on or read without end.
// Every problem is an InputError naming the file, and the line and column where there is one:
//   runs/x/runs.csv:14: model_kl: must be at least 0, got -0.3
#pragma once
#include <filesystem>
#include <string>
#include <vector>

#include "core/running/run_record.hpp"
#include "core/running/settings.hpp"

namespace dobudget::io {

struct FinishedRun {
  std::filesystem::path dir;
  Study study;
  std::string resolved_yaml;    // the bytes of study.resolved.yaml
  std::vector<RunRecord> rows;  // runs.csv (fit_seconds from timings.csv), canonical order
};

// Loads and checks the run directory `dir` (see above). Throws InputError.
FinishedRun load_finished_run(const std::filesystem::path& dir);

// Checks that study.resolved.yaml's bytes have the study hash that `dir`'s manifest.json and
// units.journal header record (those present). Throws InputError naming the file that disagrees,
// and naming `dir` when neither records a hash.
void check_recorded_study_hash(const std::filesystem::path& dir, const std::string& resolved_yaml);

}  // namespace dobudget::io
