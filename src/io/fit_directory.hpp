// The output of `dobudget fit` (issue 9): the regime-aware latent model fitted to a team's
// records, as a directory of four files, each written atomically (atomic_file.hpp) once every file
// has been computed:
//   model.yaml     the chosen fit in the model-file format (model_file.hpp), with the fitted decision
//                  rule as its logging_policy (one row per latent value; absent without logged
//                  episodes) and the codebook's rewards (0 without them): usable as
//                  `environment: { file: DIR/model.yaml }`;
//   selection.csv  latent_states,loglik,parameters,bic,heldout_loglik,chosen: one row per size tried
//                  (model_selection.hpp says how the choice is made);
//   evidence.csv   latent_state,action,logged_transitions,pilot_transitions: the expected number of
//                  transitions out of each latent value under each action, by regime (evidence.hpp);
//   fit.md         sizes, the choice with its table, diagnostics, the evidence table and, in plain
//                  words, the action effects the records leave open.
// Codes are user text: CSV cells through csv_field, Markdown through markdown_text.
#pragma once
#include <filesystem>
#include <string>

#include "core/fitting/evidence.hpp"
#include "core/fitting/model_selection.hpp"
#include "io/episode_file.hpp"

namespace dobudget::io {

// A (latent value, action) pair is reported as left open when the records show fewer expected
// transitions than this, in both regimes together: a Dirichlet row with N transitions has a
// standard deviation of at most 1/(2 sqrt(N + 1)) per entry (at an entry of 1/2; Kotz, Balakrishnan
// and Johnson 2000, ch. 49), which is above 0.09 below 30: the effect is then known to no better
// than about +-0.2 (posterior_world.hpp). A choice of ours, stated in fit.md.
inline constexpr double open_evidence = 30.0;

struct RecordsFit {
  Selection selection;
  Evidence evidence;  // at the chosen size
  Codebook codebook;
  int logged_episodes = 0, pilot_episodes = 0;
  int horizon = 0, shortest = 0;  // longest and shortest episode (actions)
  std::string source;             // the episodes file as named on the command line (user text)
  std::string chosen_by;          // "auto" or "given"
};

// Fits the regime-aware latent model to the records at the sizes `selection` lists (model_selection.hpp)
// and gathers what `dobudget fit` writes: the chosen size, its evidence, the records' sizes.
// `source` names the episodes file (user text); `automatic`: the size was chosen, not given.
// Throws InputError naming `source` when no episode takes an action (nothing to fit).
RecordsFit fit_records(const EpisodeRecords& records, const FitSettings& fit, const SelectionSettings& selection,
                       std::uint64_t seed, const std::string& source, bool automatic);

// The chosen fit as an environment: its model with the codebook's rewards and the decision rule as
// the logging policy.
Environment fitted_environment(const RecordsFit& fit);

std::string selection_csv(const Selection& selection);
std::string evidence_csv(const RecordsFit& fit);
std::string fit_markdown(const RecordsFit& fit);

// Creates `dir` when missing and writes the four files.
void write_fit_directory(const std::filesystem::path& dir, const RecordsFit& fit);

}  // namespace dobudget::io
