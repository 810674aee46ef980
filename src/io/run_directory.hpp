// A run directory (docs/run-directory.md): study.resolved.yaml, manifest.json, units.journal (the
// resume record), and once every unit is in, runs.csv and timings.csv in canonical order.
// A directory made by a different study is refused; a second `plan` on the same directory
// computes only the units its journal lacks.
#pragma once
#include <nlohmann/json_fwd.hpp>

#include <filesystem>
#include <functional>
#include <optional>
#include <string>
#include <vector>

#include "core/running/run_record.hpp"
#include "core/running/runner.hpp"
#include "core/running/settings.hpp"
#include "core/running/unit.hpp"
#include "io/journal.hpp"

namespace dobudget::io {

struct Shard {
  int index = 0;  // K, 0-based as scheduler job-array indices run
  int count = 1;  // N
};

// Units of shard K of N: canonical unit i belongs to shard i mod N (round-robin dealing keeps
// every shard's mix of scenarios, draws and replicates, hence of cheap and costly units, alike).
std::vector<std::size_t> shard_units(std::size_t total_units, const Shard& shard);

struct Progress {
  std::size_t done = 0;   // units finished in this directory (including earlier runs)
  std::size_t total = 0;  // units this run is responsible for
  std::size_t computed = 0;  // units computed by this process so far
  double elapsed_seconds = 0.0;
};

// What plan_study gives its executor: on_unit and stop_requested (RunnerHooks) and on_records,
// for units computed by another process that arrive as units.journal records (an MPI worker's
// RESULT, checked and decoded by Journal::parse_batch): journals them with one write and one flush
// (Journal::append_batch) and counts them done. Serialised with on_unit (never two at once).
struct ExecutorHooks : RunnerHooks {
  std::function<void(Journal::Batch&&)> on_records;
};

struct PlanOptions {
  std::filesystem::path out;
  int threads = 1;
  std::optional<Shard> shard;
  std::function<void(const Progress&)> on_progress;  // called after every finished unit
  std::function<bool()> stop_requested;             // polled between units
  // Called by plan_study once the journal has been read and before any unit is computed, with
  // every unit (enumerate_units) and the indices of those this run still has to compute; it may
  // throw to refuse the run (no unit is computed, nothing more is written). `plan` states and
  // limits the cost of a resumed directory's remaining units here (plan_command.cpp).
  std::function<void(const std::vector<UnitId>& units, const std::vector<std::size_t>& todo)> before_computing;
  // Runs the units `todo` and reports each finished one through the hooks. Default: run_units
  // (threads of this process); an MPI build supplies one that also hands units to other ranks.
  std::function<void(const Study&, const std::vector<UnitId>&, const std::vector<std::size_t>& todo, int threads,
                     const ExecutorHooks&)>
      executor;
};

struct PlanOutcome {
  bool complete = false;            // every unit (of the shard) is in the journal
  std::size_t units_total = 0;
  std::size_t units_done = 0;
  std::size_t units_resumed = 0;    // found already finished in the journal
  bool torn_record_dropped = false;
  double seconds = 0.0;
  std::vector<RunRecord> rows;      // canonical order; filled when complete
};

// Hash identifying a study: FNV-1a of its resolved YAML, as 16 hex digits.
std::string study_hash(const std::string& resolved_yaml);

// Checks, writing nothing, that `dir` may hold a run directory of this study: it does not exist,
// is an empty directory (or holds only an empty units.journal: a `plan` claiming it this instant),
// or is a run directory whose study.resolved.yaml has exactly these bytes. Throws
// std::runtime_error naming the directory (and both study hashes when the study differs).
void check_directory_claim(const std::filesystem::path& dir, const std::string& resolved_yaml);

// check_directory_claim, then creates the directory and writes study.resolved.yaml if missing.
void claim_directory(const std::filesystem::path& dir, const std::string& resolved_yaml);

// Creates the directory (or checks that it belongs to this study), runs the missing units and,
// when the study is complete (and not sharded), writes runs.csv and timings.csv.
// The claim is made while holding units.journal's lock (journal.hpp): of two runs racing for one
// new directory exactly one claims it. Every journal record read back must hold its unit's rows
// (expected_rows.hpp), and runs.csv is only ever the full, consistent set of the study's rows.
// Throws std::runtime_error for a directory that belongs to another study or is being written by
// another process, InputError (file, line) for a journal of another study or with a damaged or
// foreign record.
PlanOutcome plan_study(const Study& study, const std::string& resolved_yaml, const PlanOptions& options);

// Writes runs.csv and timings.csv (atomically) for rows in canonical order.
void write_run_tables(const std::filesystem::path& dir, const std::vector<RunRecord>& rows);

// The manifest.json fields every run directory shares: program, version, study, study_hash, seed,
// seeding, libraries, scenarios, units, fits. write_manifest (and merge) add their own after these.
nlohmann::ordered_json manifest_base(const Study& study, const std::string& resolved_yaml);

// The current time in UTC as "YYYY-MM-DDTHH:MM:SSZ" (manifest.json's finished_utc).
std::string utc_timestamp();

// Writes manifest.json: versions, seeds, study hash, units, fits, shard, threads and timings.
void write_manifest(const std::filesystem::path& dir, const Study& study, const std::string& resolved_yaml,
                    const PlanOptions& options, const PlanOutcome& outcome);

}  // namespace dobudget::io
