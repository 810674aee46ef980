// The commands of the dobudget front end, one file each. They parse arguments already split by
// CLI11 (main.cpp), call the libraries and print. Exit codes: 0 success, 1 internal failure,
// 2 bad input (file, line and key named; nothing half-written), 130 interrupted.
#pragma once
#include <stdexcept>
#include <string>
#include <vector>

namespace dobudget::cli {

// The caution shown by --help, after results and in answer.md.
extern const char* const caution;

// Bad command-line input: reported like bad file input, exit code 2.
struct BadInput : std::runtime_error {
  using std::runtime_error::runtime_error;
};

// Option values are kept as typed; each command reads them with option_values.hpp, so that every
// bad value is refused with the option named (exit code 2). Empty: not given.
struct PlanArgs {
  std::string study;
  std::string out;      // empty: runs/<safe form of the study name> (file_name.hpp)
  std::string shard;    // "K/N"
  std::string threads;  // empty: all cores
  std::string max_core_hours;  // empty: the default limit (plan_command.cpp)
  bool quiet = false;
};
int plan_command(const PlanArgs& args);

int check_command(const std::string& study);

int draw_command(const std::string& study, const std::string& out);

struct AnswerArgs {
  std::string dir;
  std::vector<std::string> targets;  // "measure=value", at most one per measure
  std::string assurance;             // empty: the study's
  std::string criterion;             // empty: assurance
  std::string bootstrap;             // empty: the default
};
int answer_command(const AnswerArgs& args);

struct MergeArgs {
  std::vector<std::string> dirs;  // run directories: the shards of one study
  std::string out;                // the complete run directory to write
};
int merge_command(const MergeArgs& args);

// Fit the regime-aware latent model to a team's episodes and write DIR/{model.yaml, selection.csv,
// evidence.csv, fit.md} (fit_command.cpp).
struct FitArgs {
  std::string episodes;           // the episodes CSV
  std::string codebook;           // empty: codes in order of first appearance
  std::string latent_states;      // "auto" (or empty) or a whole number
  std::string max_latent_states;  // largest size `auto` tries; empty: 8
  std::string folds;              // episode folds for the held-out log-likelihood; empty: 5
  std::string restarts;           // empty: 3
  std::string seed;               // empty: 1
  std::string out;                // empty: fits/<safe form of the file name>
};
int fit_command(const FitArgs& args);
// Episodes of world `draw` of a study, in the episodes-file format (io/episode_file.hpp).
struct SimulateArgs {
  std::string study;
  std::string logged;        // N episodes from the world's logging policy
  std::string pilot;         // empty: 0
  std::string draw;          // empty: 0
  std::string seed;          // empty: the study's seed
  std::string out;           // the episodes file
  std::string codebook_out;  // empty: none written
};
int simulate_command(const SimulateArgs& args);

// Figures (gnuplot) and a report page in DIR/report/, from a finished run directory.
int report_command(const std::string& dir);

}  // namespace dobudget::cli
