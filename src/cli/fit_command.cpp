// dobudget fit: fit the regime-aware latent model to a team's episodes (io/episode_file.hpp), choose
// the latent size, and write model.yaml, selection.csv, evidence.csv and fit.md (io/fit_directory.hpp).
#include <fmt/format.h>

#include <algorithm>
#include <chrono>
#include <cstdio>

#include "cli/commands.hpp"
#include "cli/option_values.hpp"
#include "core/fitting/model_selection.hpp"
#include "io/episode_file.hpp"
#include "io/file_name.hpp"
#include "io/fit_directory.hpp"
#include "io/model_file.hpp"
#include "io/text_escape.hpp"

namespace dobudget::cli {

int fit_command(const FitArgs& args) {
  // Every option is read before any file is.
  SelectionSettings sel;
  const int max_size = args.max_latent_states.empty()
                           ? 8
                           : static_cast<int>(whole_option("--max-latent-states", args.max_latent_states, 1, io::max_model_size));
  const bool automatic = args.latent_states.empty() || args.latent_states == "auto";
  if (automatic) {
    sel.sizes.clear();
    for (int z = 1; z <= max_size; ++z) sel.sizes.push_back(z);
  } else {
    sel.sizes = {static_cast<int>(whole_option("--latent-states", args.latent_states, 1, io::max_model_size))};
  }
  sel.folds = args.folds.empty() ? 5 : static_cast<int>(whole_option("--folds", args.folds, 0, 100));
  if (sel.folds == 1) throw BadInput("--folds: expected 0 (no held-out log-likelihood) or 2 to 100, got '1'");
  if (automatic && sel.folds == 0) throw BadInput("--folds: `--latent-states auto` chooses by held-out log-likelihood, so it needs 2 to 100 folds");
  FitSettings fs;
  fs.restarts = args.restarts.empty() ? fs.restarts : static_cast<int>(whole_option("--restarts", args.restarts, 1, 1000));
  fs.max_restarts = std::max(fs.restarts, fs.max_restarts);
  const std::uint64_t seed = args.seed.empty() ? 1 : static_cast<std::uint64_t>(whole_option("--seed", args.seed, 0, 1LL << 62));
  // The directory is named by --out or by the episodes file's name, never by file content.
  const std::filesystem::path out =
      args.out.empty() ? std::filesystem::path("fits") / io::safe_file_name(std::filesystem::path(args.episodes).stem().string())
                       : std::filesystem::path(args.out);

  io::Codebook codebook;
  const bool with_codebook = !args.codebook.empty();
  if (with_codebook) codebook = io::read_codebook(args.codebook);
  const io::EpisodeRecords records = io::read_episodes(args.episodes, with_codebook ? &codebook : nullptr);
  if (records.logged.count + records.pilot.count == 0) throw BadInput(fmt::format("{}: holds no episodes", args.episodes));

  const auto t0 = std::chrono::steady_clock::now();
  const io::RecordsFit f = io::fit_records(records, fs, sel, seed, args.episodes, automatic);
  const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  const FitResult& best = f.selection.best().fit;
  io::write_fit_directory(out, f);

  std::printf("%d logged and %d pilot episodes, %d observation and %d action codes\n", f.logged_episodes,
              f.pilot_episodes, static_cast<int>(f.codebook.observations.size()), static_cast<int>(f.codebook.actions.size()));
  std::printf("%s", io::selection_csv(f.selection).c_str());
  std::printf("chosen: %d latent states (%s); restarts %s, %s; %.1f s\n", f.selection.best().latent_states,
              automatic ? "best held-out log-likelihood, one-standard-error rule" : "given",
              best.confirmed ? "agree" : "do not agree", best.converged ? "converged" : "not converged", seconds);
  std::printf("wrote %s/{model.yaml, selection.csv, evidence.csv, fit.md}\n", io::printable_line(out.string()).c_str());
  return 0;
}

}  // namespace dobudget::cli
