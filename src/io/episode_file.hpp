// A team's own episodes, as a tidy CSV file (one row per step), and the codebook that names their
// observation and action codes.
//
//   episode,step,observation,action,regime
//   ward-3/2024-017,0,calm,wait,logged
//   ward-3/2024-017,1,restless,dose,logged
//   ward-3/2024-017,2,calm,,logged          <- the episode's last row: no action
//   p1,0,calm,dose,pilot
//   p1,1,calm,,pilot
//
// The episodes file (read_episodes):
//   * the header is exactly episode,step,observation,action,regime; fields follow RFC 4180
//     (csv_records.hpp: quoted fields, "" inside them, CRLF or LF, a UTF-8 byte-order mark);
//   * `episode` is any text id (1 to max_text_bytes bytes); `step` is 0, 1, 2, ... without gaps;
//     `observation` and `action` are codes (text of 1 to max_text_bytes bytes); `action` is empty on
//     an episode's last row and only there (a record ends at an observation); `regime` is `logged`
//     or `pilot`, the same on every row of an episode;
//   * rows of different episodes may be interleaved (as an export ordered by time writes them), but
//     the rows of one episode come in the order of their steps; a repeated (episode, step), a step
//     that skips one, an episode that does not start at step 0 are refused;
//   * ids and codes are valid UTF-8 without control characters (text_escape.hpp: they must read
//     back unchanged through printable_line), at most max_codes codes of each kind;
//   * episodes may have different lengths: every Dataset gets the horizon of the longest episode of
//     the file, and `lengths` when its episodes differ in length (dataset.hpp);
//   * limits before allocation: the file is read in chunks, never whole, and refused above
//     max_episode_file_bytes (1 GiB: some 35 million rows of 30 bytes); an episode has at most
//     max_episode_actions actions; a regime's padded storage (episodes x (horizon + 1)) is at most
//     max_episode_slots.
// The codebook (read_codebook), YAML:
//   observations: [calm, restless]     # the order of the observation codes (index 0, 1, ...)
//   actions: [wait, dose]              # the order of the action codes
//   rewards: {calm: 1, restless: 0}    # optional: a reward for every observation code
// Without a codebook, codes are numbered in order of first appearance and there are no rewards.
// Every problem is an InputError: "FILE:LINE: COLUMN: problem" for the episodes file (COLUMN one
// of the header's names, or "header"), "FILE:LINE: KEY: problem" for the codebook (yaml_input.hpp).
#pragma once
#include <cstddef>
#include <cstdint>
#include <filesystem>
#include <string>
#include <vector>

#include "core/world/dataset.hpp"

namespace dobudget::io {

inline constexpr std::uintmax_t max_episode_file_bytes = std::uintmax_t{1} << 30;
inline constexpr std::size_t max_text_bytes = 200;     // an episode id or a code
inline constexpr int max_codes = 200;                  // of each kind: model_file.hpp's max_model_size
inline constexpr int max_episode_actions = 10000;      // the longest environment.horizon
inline constexpr std::int64_t max_episode_slots = std::int64_t{1} << 28;  // 1 GiB of int32 per array
inline constexpr std::size_t max_episodes = 10000000;  // ids in one file: the largest budget of a study

struct Codebook {
  std::vector<std::string> observations;  // code of observation index k, in order
  std::vector<std::string> actions;       // code of action index k
  std::vector<double> rewards;            // reward per observation index; empty: none given
  bool has_rewards() const { return !rewards.empty(); }
};

struct EpisodeRecords {
  Codebook codebook;
  Dataset logged, pilot;  // same horizon: the longest episode in the file; lengths filled
                          // (Dataset::lengths) when episodes differ in length
  std::vector<std::string> logged_ids, pilot_ids;  // episode ids, in order of first appearance
};

// The codebook file; InputError on bad input (file, line, key).
Codebook read_codebook(const std::filesystem::path& file);

// The episodes file. With a codebook, every code must be in it and the result carries it; without
// one (null), codes are numbered in order of first appearance and rewards are empty.
EpisodeRecords read_episodes(const std::filesystem::path& csv, const Codebook* codebook);

// The episodes file of `records`: logged episodes, then pilot ones, each episode's rows in order,
// fields quoted where RFC 4180 needs it; written atomically (atomic_file.hpp). read_episodes with
// records.codebook gives `records` back. std::invalid_argument when records are inconsistent (ids
// and counts differ, a code index outside the codebook).
void write_episodes(const std::filesystem::path& csv, const EpisodeRecords& records);

// The codebook as YAML text that read_codebook reads back to the same codebook (rewards in the
// shortest form that reads back to the same double).
std::string codebook_yaml(const Codebook& codebook);

// The codebook of a simulated world: observations o0, o1, ..., actions a0, a1, ... and the world's
// reward per observation.
Codebook numbered_codebook(const Pomdp& world);

// Episodes of a simulated world as a file holds them: numbered_codebook(world), ids logged-0,
// logged-1, ... and pilot-0, pilot-1, ...
EpisodeRecords numbered_records(const Pomdp& world, Dataset logged, Dataset pilot);

// The most rows `dobudget simulate` writes: 2.5 x 10^7, about 0.9 GB at 35 bytes a row, so that
// what it writes stays below max_episode_file_bytes for read_episodes.
inline constexpr long long max_written_rows = 25000000;

}  // namespace dobudget::io
