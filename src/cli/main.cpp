// dobudget command line: declares the commands and options (CLI11), dispatches, and maps errors
// to exit codes. Each command lives in its own file (commands.hpp).
#include <CLI/CLI.hpp>

#include <cstdio>

#include "cli/commands.hpp"
#include "io/input_error.hpp"
#include "io/text_escape.hpp"

namespace dobudget::cli {

const char* const caution =
    "dobudget is a simulation under stated assumptions (the synthetic family or the given model, the logging\n"
    "model, the pilot policy). Its numbers are no substitute for a qualified statistician, for ethics review,\n"
    "or for the regulations that govern trials where you work.";

}  // namespace dobudget::cli

using namespace dobudget;
using namespace dobudget::cli;

int main(int argc, char** argv) {
  CLI::App app{
      "dobudget: how many pilot episodes do you need, given the logged episodes you hold?\n"
      "It simulates partially observable problems of your sizes (or your own model), sweeps logged and pilot\n"
      "budgets, fits models three ways (pilot-only, pooled, regime-aware), and reports the pilot budget that\n"
      "reaches a target model error with a stated assurance.",
      "dobudget"};
  app.footer(std::string("\nExamples:\n"
                         "  dobudget check configs/default.yaml          validate, show every default, count fits\n"
                         "  dobudget plan configs/default.yaml --threads 2\n"
                         "  dobudget plan study.yaml --shard 3/10 --out runs/part3   (one job-array task)\n"
                         "  dobudget merge runs/part* --out runs/study   (combine the shards)\n"
                         "  dobudget report runs/default                 (figures and runs/default/report/report.md)\n"
                         "  dobudget answer runs/default --target model_kl=0.01 --assurance 0.9   (re-analysis, seconds)\n"
                         "  dobudget draw configs/default.yaml --out envs   (write the synthetic environments)\n"
                         "  dobudget fit episodes.csv --codebook codebook.yaml --out fit   (fit your own records)\n"
                         "  dobudget simulate configs/default.yaml --logged 500 --pilot 20 --out episodes.csv\n\n"
                         "Caution: ") +
             caution);
  app.require_subcommand(1);
  app.set_version_flag("--version", std::string(DOBUDGET_VERSION));

  std::string study_file, out;
  PlanArgs plan_args;
  auto* plan = app.add_subcommand("plan", "Simulate the study, write the run directory and print the results");
  plan->add_option("study", plan_args.study, "Study file (YAML)")->required();
  plan->add_option("--out", plan_args.out, "Run directory (default: runs/<study name>); rerun on it to resume")
      ->type_name("DIR");
  plan->add_option("--threads", plan_args.threads, "Worker threads, 1 to 1024 (default: all cores)")->type_name("N");
  plan->add_option("--shard", plan_args.shard, "Compute only shard K of N (K = 0..N-1, as job-array indices run)")
      ->type_name("K/N");
  plan->add_option("--max-core-hours", plan_args.max_core_hours,
                   "Refuse to start when the estimated cost is above H core-hours (default 1000)")
      ->type_name("H");
  plan->add_flag("--quiet", plan_args.quiet, "No progress messages");

  auto* check = app.add_subcommand("check", "Validate a study, print it with every default filled in, count the fits");
  check->add_option("study", study_file, "Study file (YAML)")->required();

  auto* draw = app.add_subcommand("draw", "Write each synthetic environment of a study as a model file (YAML)");
  draw->add_option("study", study_file, "Study file (YAML)")->required();
  draw->add_option("--out", out, "Directory for the model files (default: environments/<study name>)");

  AnswerArgs answer_args;
  auto* answer = app.add_subcommand("answer", "Recompute the answer from a finished run directory (no simulation)");
  answer->add_option("dir", answer_args.dir, "Run directory")->required();
  answer->add_option("--target", answer_args.targets,
                     "MEASURE=VALUE with VALUE > 0, e.g. model_kl=0.01 (once per measure; replaces the study's target)")
      ->type_name("MEASURE=VALUE");
  answer->add_option("--assurance", answer_args.assurance, "Fraction of (draw, replicate) pairs that must meet the target, in (0, 1)")
      ->type_name("B");
  answer->add_option("--criterion", answer_args.criterion, "assurance (default: fraction of pairs meeting the target) or mean (mean measure meets it)");
  answer->add_option("--bootstrap", answer_args.bootstrap, "Bootstrap resamples for the 90% interval, 0 to 100000 (default 1000; 0: none)")
      ->type_name("N");

  MergeArgs merge_args;
  auto* merge = app.add_subcommand(
      "merge", "Combine the shards of a study (plan --shard K/N) into one complete run directory");
  merge->add_option("dirs", merge_args.dirs, "Run directories to combine: every shard of the study, each once")
      ->required();
  merge->add_option("--out", merge_args.out, "The complete run directory to write (new, empty, or of this study)")
      ->required();

  FitArgs fit_args;
  auto* fit = app.add_subcommand("fit", "Fit the regime-aware latent model to your episodes (CSV), choose the latent size, "
                                        "and write DIR/{model.yaml, selection.csv, evidence.csv, fit.md}");
  fit->add_option("episodes", fit_args.episodes, "Episodes file: episode,step,observation,action,regime (CSV)")->required();
  fit->add_option("--codebook", fit_args.codebook, "Codebook (YAML): the order of the codes and a reward per observation")
      ->type_name("FILE");
  fit->add_option("--latent-states", fit_args.latent_states,
                  "Latent size K (1 to 200), or auto (default): the size with the best held-out log-likelihood over "
                  "episode folds, the smallest within one standard error")
      ->type_name("K|auto");
  fit->add_option("--max-latent-states", fit_args.max_latent_states, "Largest size auto tries, 1 to 200 (default 8)")->type_name("K");
  fit->add_option("--folds", fit_args.folds, "Episode folds for the held-out log-likelihood, 2 to 100 (default 5; 0: none, with a given K)")
      ->type_name("N");
  fit->add_option("--restarts", fit_args.restarts, "EM starts per fit, 1 to 1000 (default 3)")->type_name("N");
  fit->add_option("--seed", fit_args.seed, "Seed of the starts and of the folds (default 1)")->type_name("S");
  fit->add_option("--out", fit_args.out, "Directory to write (default: fits/<episodes file name>)")->type_name("DIR");
  SimulateArgs simulate_args;
  auto* simulate = app.add_subcommand(
      "simulate", "Write episodes of one world of a study as an episodes file (CSV), the format dobudget imports");
  simulate->add_option("study", simulate_args.study, "Study file (YAML); its first scenario when it sweeps")->required();
  simulate->add_option("--logged", simulate_args.logged, "Logged episodes, from the world's logging policy (0 to 10^7)")
      ->type_name("N")
      ->required();
  simulate->add_option("--pilot", simulate_args.pilot, "Pilot episodes, from the pilot policy (default 0)")->type_name("M");
  simulate->add_option("--draw", simulate_args.draw, "World number K, 0 to environment.draws - 1 (default 0): the world `draw` and `plan` make")
      ->type_name("K");
  simulate->add_option("--seed", simulate_args.seed,
                       "Seed of the episodes only (default: the study's seed); the world stays the study's draw K")
      ->type_name("S");
  simulate->add_option("--out", simulate_args.out, "Episodes file to write (CSV: episode,step,observation,action,regime)")
      ->type_name("FILE")
      ->required();
  simulate->add_option("--codebook-out", simulate_args.codebook_out,
                       "Also write the codebook (YAML: codes o0.. and a0.., the world's reward per observation)")
      ->type_name("FILE");

  std::string report_dir;
  auto* report = app.add_subcommand("report", "Figures (gnuplot) and a report page, DIR/report/report.md, from a finished run");
  report->add_option("dir", report_dir, "Run directory")->required();

  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    return app.exit(e) == 0 ? 0 : 2;
  }
  // Messages can quote user text (a key, a value, a file name): printable_text keeps their line
  // breaks and replaces control characters, so no terminal escape sequence reaches the screen.
  try {
    if (*plan) return plan_command(plan_args);
    if (*check) return check_command(study_file);
    if (*draw) return draw_command(study_file, out);
    if (*answer) return answer_command(answer_args);
    if (*merge) return merge_command(merge_args);
    if (*report) return report_command(report_dir);
    if (*fit) return fit_command(fit_args);
    if (*simulate) return simulate_command(simulate_args);
  } catch (const io::InputError& e) {
    std::fprintf(stderr, "error: %s\n", io::printable_text(e.what()).c_str());
    return 2;
  } catch (const BadInput& e) {
    std::fprintf(stderr, "error: %s\n", io::printable_text(e.what()).c_str());
    return 2;
  } catch (const std::runtime_error& e) {
    std::fprintf(stderr, "error: %s\n", io::printable_text(e.what()).c_str());
    return 2;
  } catch (const std::exception& e) {
    std::fprintf(stderr, "internal error: %s\n", io::printable_text(e.what()).c_str());
    return 1;
  }
  return 0;
}
