// runs.csv and timings.csv (design.md sec. 7). runs.csv is byte-identical across runs of the same
// study (whatever the threads, shards or ranks): it holds no wall-clock figure, and numbers are
// written in the shortest form that reads back to the same double. timings.csv holds the same
// keys with fit_seconds. The design's columns come first; appended after them: `note` (why a
// measure is empty, e.g. "no room for planning"), `starts` (EM starts the fit ran) and `confirmed`
// (1 when a second start reached the best objective; fit.hpp).
#pragma once
#include <filesystem>
#include <string>
#include <vector>

#include "core/run_record.hpp"

namespace dobudget::io {

inline constexpr const char* runs_header =
    "scenario,environment,replicate,strategy,logged,pilot,model_kl,return_gap,loglik,iterations,converged,note,starts,"
    "confirmed";
inline constexpr const char* timings_header = "scenario,environment,replicate,strategy,logged,pilot,fit_seconds";

std::string runs_csv(const std::vector<RunRecord>& rows);
std::string timings_csv(const std::vector<RunRecord>& rows);

// One runs.csv line (no newline) and its inverse; parse_runs_line throws std::runtime_error on a
// malformed line. fit_seconds is not part of runs.csv.
std::string runs_line(const RunRecord& r);
RunRecord parse_runs_line(const std::string& line);

// Reads runs.csv (and fit_seconds from timings.csv beside it when present).
std::vector<RunRecord> read_runs(const std::filesystem::path& runs_csv_file);

}  // namespace dobudget::io
