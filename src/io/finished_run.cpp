#include "io/finished_run.hpp"

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include <limits>
#include <optional>

#include "core/answer/precision_search.hpp"
#include "core/running/unit.hpp"
#include "io/atomic_file.hpp"
#include "io/expected_rows.hpp"
#include "io/input_error.hpp"
#include "io/journal.hpp"
#include "io/regular_file.hpp"
#include "io/run_directory.hpp"
#include "io/runs_table.hpp"
#include "io/study_file.hpp"

namespace dobudget::io {
namespace {

namespace fs = std::filesystem;

// The whole of a regular file of at most max_bytes (regular_file.hpp); InputError naming it
// otherwise. *size, when given, receives its size; nullopt when it holds more than max_bytes.
std::optional<std::string> read_input(const fs::path& file, std::uintmax_t max_bytes, std::uintmax_t* size = nullptr) {
  try {
    return read_regular_file(file, max_bytes, size);
  } catch (const InputError&) {
    throw;  // not a regular file: named as such
  } catch (const std::runtime_error&) {
    throw InputError(file.string(), 0, "", "cannot be read");
  }
}

std::string read_input(const fs::path& file) { return *read_input(file, std::numeric_limits<std::uintmax_t>::max()); }

// The first line of a regular file (at most 200 bytes of it), without reading the rest; a pipe
// placed there is refused, not waited on.
std::string first_line(const fs::path& file) {
  std::string line;
  try {
    line = read_file_start(file, 200);
  } catch (const InputError&) {
    throw;
  } catch (const std::runtime_error&) {
    throw InputError(file.string(), 0, "", "cannot be read");
  }
  return line.substr(0, line.find('\n'));
}

}  // namespace

void check_recorded_study_hash(const fs::path& dir, const std::string& resolved) {
  const std::string hash = study_hash(resolved);
  const fs::path resolved_file = dir / "study.resolved.yaml";
  const auto edited = [&](const fs::path& record, const std::string& recorded) {
    return InputError(resolved_file.string(), 0, "",
                      fmt::format("has study hash {}, but {} records study hash {} from planning: the file was edited "
                                  "after the run; restore it, or plan the edited study into a fresh --out directory",
                                  hash, record.filename().string(), recorded));
  };
  const fs::path manifest = dir / "manifest.json";
  std::error_code ec;
  const bool has_manifest = fs::exists(fs::symlink_status(manifest, ec));
  if (has_manifest) {
    nlohmann::json j;
    try {
      j = nlohmann::json::parse(read_input(manifest));
    } catch (const nlohmann::json::exception&) {
      throw InputError(manifest.string(), 0, "", "is not valid JSON; it was damaged");
    }
    if (!j.is_object() || !j.contains("study_hash") || !j["study_hash"].is_string())
      throw InputError(manifest.string(), 0, "study_hash",
                       "missing; this manifest.json was not written by dobudget plan or merge");
    const std::string recorded = j["study_hash"].get<std::string>();
    if (recorded != hash) throw edited(manifest, recorded.substr(0, 40));
  }
  const fs::path journal = dir / "units.journal";
  bool journal_records_hash = false;
  if (fs::exists(fs::symlink_status(journal, ec))) {
    const std::string line = first_line(journal);
    const std::string prefix = Journal::header("");  // "dobudget-journal 2 study \n"
    const std::string stem = prefix.substr(0, prefix.size() - 1);
    // Journals of format 1 (no header) record no hash; a format-2 header must name this study.
    journal_records_hash = line.compare(0, stem.size(), stem) == 0;
    if (journal_records_hash && line.substr(stem.size()) != hash) {
      const std::string recorded = line.substr(stem.size(), 40);
      if (!has_manifest) throw edited(journal, recorded);
      // study.resolved.yaml agrees with manifest.json: the journal is the odd one out.
      throw InputError(journal.string(), 1, "",
                       fmt::format("belongs to another study (its header names study hash {}; study.resolved.yaml "
                                   "and manifest.json beside it have {})",
                                   recorded, hash));
    }
  }
  // plan and merge always write manifest.json: with neither it nor a journal header, nothing
  // records the study planned, and an edited study.resolved.yaml could not be told from the original.
  if (!has_manifest && !journal_records_hash)
    throw InputError(dir.string(), 0, "",
                     "has no manifest.json (and no units.journal header recording the study hash), so its "
                     "study.resolved.yaml cannot be checked against the study that was planned; rerun `dobudget "
                     "plan` (the same study, the same --out) or `dobudget merge`, which write it");
}

namespace {

// A range-mode directory (precision_run.hpp) is answered from its last round: manifest.json's
// final_round, a whole number from 1 to max_search_rounds, names the directory round-K.
int final_round(const fs::path& dir) {
  const fs::path manifest = dir / "manifest.json";
  if (!fs::exists(manifest))
    throw InputError(dir.string(), 0, "",
                     "is a range-mode run directory without manifest.json: finish the run with `dobudget plan` first");
  nlohmann::json j;
  try {
    j = nlohmann::json::parse(read_input(manifest));
  } catch (const nlohmann::json::exception&) {
    throw InputError(manifest.string(), 0, "", "is not valid JSON; it was damaged");
  }
  if (!j.is_object() || !j.contains("final_round"))
    throw InputError(manifest.string(), 0, "final_round",
                     "missing: the range-mode run is not finished; finish it with `dobudget plan`");
  if (!j["final_round"].is_number_integer() || j["final_round"].get<long long>() < 1 ||
      j["final_round"].get<long long>() > max_search_rounds)
    throw InputError(manifest.string(), 0, "final_round",
                     fmt::format("must be a whole number from 1 to {}", max_search_rounds));
  return static_cast<int>(j["final_round"].get<long long>());
}

FinishedRun load_run(const fs::path& dir, bool range_allowed);

}  // namespace

FinishedRun load_finished_run(const fs::path& dir) { return load_run(dir, true); }

namespace {

FinishedRun load_run(const fs::path& dir, bool range_allowed) {
  FinishedRun run;
  run.dir = dir;
  const fs::path resolved_file = dir / "study.resolved.yaml", runs_file = dir / "runs.csv";
  if (!fs::is_directory(dir))
    throw InputError(dir.string(), 0, "", "is not a directory (expected a dobudget run directory)");
  if (!fs::exists(resolved_file))
    throw InputError(dir.string(), 0, "", "is not a dobudget run directory (no study.resolved.yaml)");
  if (!fs::exists(runs_file))
    throw InputError(dir.string(), 0, "",
                     "has no runs.csv yet: finish the run with `dobudget plan` (or `merge` its shards) first");
  run.resolved_yaml = read_input(resolved_file);
  check_recorded_study_hash(dir, run.resolved_yaml);
  run.study = load_study(resolved_file);
  if (run.study.precision) {
    if (!range_allowed)
      throw InputError(resolved_file.string(), 0, "precision", "a round of a range-mode run must be a plain study");
    FinishedRun last = load_run(dir / fmt::format("round-{}", final_round(dir)), false);
    last.dir = dir;
    return last;
  }

  std::uintmax_t rows = 0;
  for (const UnitId& u : enumerate_units(run.study))
    rows += rows_per_unit(run.study.scenarios[static_cast<std::size_t>(u.scenario)].settings);
  std::uintmax_t size = 0;
  const std::optional<std::string> runs_text = read_input(runs_file, (rows + 1) * max_row_bytes, &size);
  if (!runs_text)
    throw InputError(runs_file.string(), 0, "",
                     fmt::format("is {} bytes, far more than the study's {} rows can fill; it is not this study's "
                                 "runs.csv",
                                 size, rows));
  run.rows = parse_runs(*runs_text, runs_file.string());
  check_rows_against_study(run.study, run.rows, runs_file.string());
  if (fs::exists(dir / "timings.csv")) read_fit_seconds(dir / "timings.csv", run.rows);
  return run;
}

}  // namespace

}  // namespace dobudget::io
