// Merging run directories (docs/clusters.md, "Shards and merge"; `dobudget merge DIR... --out DIR`): the shards of
// a study, each computed by `dobudget plan --shard K/N` (a scheduler job array), become one
// complete run directory, the same as a single `plan` of the study would have written:
// study.resolved.yaml, units.journal (every unit, in canonical order), runs.csv and timings.csv,
// answer.csv and answer.md, and manifest.json (which names the merged inputs). runs.csv and
// answer.csv are byte-identical to those of a single-process run.
//
// Everything is checked before anything is written; on any problem a MergeError says what and
// where, and --out is left untouched:
//   * every input is a run directory (study.resolved.yaml) of the same study: the same bytes of
//     study.resolved.yaml (the directory that differs is named with both study hashes);
//   * no input is listed twice and --out is none of the inputs;
//   * --out may hold this study (check_directory_claim: absent, empty, or a run directory of the
//     same study);
//   * every input journal is intact: a torn last record (a run interrupted while writing) means
//     the input must be resumed first; a damaged record before the last is named;
//   * no input is still being written by a running `plan` (its journal lock is held);
//   * every input's study.resolved.yaml has the study hash its manifest.json and journal header
//     recorded at planning time (check_recorded_study_hash), and every journal header names it;
//   * every record belongs to the study (unit index in range, exactly that unit's rows in order:
//     unit_rows_problem, expected_rows.hpp); a unit recorded twice in one journal is named;
//   * together the journals hold every unit exactly once: a unit in two inputs is named, with
//     both directories; missing units are counted and attributed to their shards K/N when the
//     inputs' manifest.json give a shard, otherwise the first few are named.
// A single complete directory (unsharded, or `--shard 0/1`) merges on its own: a copy.
#pragma once
#include <filesystem>
#include <optional>
#include <stdexcept>
#include <string>
#include <vector>

#include "core/answer/answer.hpp"
#include "core/running/run_record.hpp"
#include "core/running/settings.hpp"
#include "io/run_directory.hpp"

namespace dobudget::io {

// A problem with the inputs or the output of a merge (the command line's exit code 2).
struct MergeError : std::runtime_error {
  using std::runtime_error::runtime_error;
};

// One input directory, as read.
struct MergeInput {
  std::filesystem::path dir;
  std::optional<Shard> shard;          // from its manifest.json, when it names one; else, when the other
                                       // inputs name a split K/N and all its units belong to one shard
                                       // of it, that shard (a run killed before writing its manifest)
  std::optional<double> wall_seconds;  // from its manifest.json, when present
  std::size_t units = 0;               // units in its journal
};

// Everything a merge writes, computed in memory.
struct Merge {
  Study study;
  std::string resolved_yaml;           // the inputs' study.resolved.yaml
  std::vector<MergeInput> inputs;      // in the order given
  std::size_t units = 0;               // units of the study (all present)
  std::vector<RunRecord> rows;         // every unit's rows, canonical order
  std::string journal;                 // units.journal of the merged directory
  std::vector<AnswerRow> answers;      // compute_study_answers(study, rows)
  double seconds = 0.0;                // time spent reading and checking
};

// Reads and checks the inputs and --out (see above), and computes the merged tables and answers.
// Writes nothing. Throws MergeError (and InputError for a study.resolved.yaml that does not load).
Merge prepare_merge(const std::vector<std::filesystem::path>& inputs, const std::filesystem::path& out);

// Writes the complete run directory at `out` (claim_directory, then every file atomically).
void write_merge(const Merge& merge, const std::filesystem::path& out);

// prepare_merge, then write_merge.
Merge merge_run_directories(const std::vector<std::filesystem::path>& inputs, const std::filesystem::path& out);

// "unit 7 (scenario 0, environment draw 1, replicate 2)": how merge messages name a unit.
std::string describe_unit(std::size_t index, const UnitId& unit);

}  // namespace dobudget::io
