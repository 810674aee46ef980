// A study whose worlds come from the team's records (issue 9):
//   environment: { data: episodes.csv, codebook: codebook.yaml, draws: 16, latent_states: auto,
//                  prior_concentration: 1 }
// The study reader (study_file.cpp) reads the records once to validate them and to take their
// facts (sizes, episode counts, the longest episode, the digest of their bytes); the fit, which
// costs seconds to minutes, runs only in the commands that need worlds (plan, check, draw,
// simulate: prepare_records below), never in answer, report or merge, which read the resolved
// study only (it carries the facts, so a run directory does not need the records to be re-read).
// The fit is deterministic (every start and the episode folds draw from the study seed, on one
// thread), so every process of a run (threads, shards, MPI ranks) computes the same worlds; and it
// is the fit `dobudget fit EPISODES.csv --seed <study seed>` makes with the same latent-size setting.
#pragma once
#include <filesystem>
#include <string>

#include "core/running/settings.hpp"
#include "core/running/stop.hpp"
#include "io/episode_file.hpp"

namespace dobudget::io {

// What the study reader takes from the records (written in the resolved study as environment.records).
struct RecordsFacts {
  std::string digest;  // records_digest of the files
  int logged_episodes = 0, pilot_episodes = 0;
  int longest_episode = 0;  // actions in the longest episode
  int observation_codes = 0, action_codes = 0;
  bool rewards = false;  // the codebook gives a reward per observation
  int chosen_latent_states = 0;  // the fit's latent size, once fitted (0: not known yet)
};

// FNV-1a 64 (as the study hash, run_directory.hpp) of the bytes of the episodes file, then of the
// codebook (when given), each preceded by its length: 16 hex digits.
std::string records_digest(const std::filesystem::path& data, const std::filesystem::path& codebook);

// Reads and validates the records (InputError located in the episodes file or the codebook).
EpisodeRecords read_records(const std::filesystem::path& data, const std::filesystem::path& codebook);
RecordsFacts facts_of(const EpisodeRecords& records, const std::string& digest);

// Fits the records of every scenario that has them (once for the study: the latent-size setting
// cannot be swept) and attaches the posterior of plausible worlds (posterior_world.hpp). Sets the
// family sizes to the fit's, and fit.latent_states to the chosen size when the study left it to
// follow the records. Throws InputError when the records changed since the study was read or
// resolved (digest or facts differ). No-op for a study without records. `progress`, when not
// null, receives one line when the fit starts and one when it ends.
void prepare_records(Study& study, const StopToken& stop = {}, void (*progress)(const std::string&) = nullptr);

}  // namespace dobudget::io
