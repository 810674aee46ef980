// dobudget answer: recompute the answer from a finished run directory, no simulation.
#include <fmt/format.h>

#include <cstdio>

#include "cli/commands.hpp"
#include "cli/option_values.hpp"
#include "core/answer/answer.hpp"
#include "io/answer_table.hpp"
#include "io/pilot_choice_table.hpp"
#include "io/finished_run.hpp"
#include "io/runs_table.hpp"
#include "io/study_file.hpp"

namespace dobudget::cli {
namespace {

// At most this many bootstrap resamples: the percentile interval's own Monte Carlo error is
// already small at B = 1000-2000 (Efron and Tibshirani, "An Introduction to the Bootstrap", 1993,
// sec. 19.3), and 100000 keeps a re-analysis within minutes.
constexpr long long max_bootstrap = 100000;

// "model_kl=0.01" -> (model_kl, 0.01); the value a finite decimal number > 0.
std::pair<Measure, double> parse_target(const std::string& text) {
  const auto eq = text.find('=');
  const auto m = parse_measure(text.substr(0, eq == std::string::npos ? 0 : eq));
  const std::string expected = "--target " + text + ": expected MEASURE=VALUE with MEASURE model_kl or return_gap and "
                               "VALUE a number greater than 0";
  if (eq == std::string::npos || !m) throw BadInput(expected);
  double v = 0.0;
  try {
    v = number_option("--target " + std::string(name(*m)), std::string_view(text).substr(eq + 1));
  } catch (const BadInput&) {
    throw BadInput(expected);
  }
  if (!(v > 0.0)) throw BadInput(expected);
  return {*m, v};
}

}  // namespace

// The overrides the options ask for; BadInput for any bad value, before anything is read.
AnswerOverrides answer_overrides(const AnswerArgs& args) {
  AnswerOverrides ov;
  for (const auto& t : args.targets) {
    const auto [m, v] = parse_target(t);
    if (!ov.targets.emplace(m, v).second)
      throw BadInput(fmt::format("--target {}: a target for {} is given twice; give one", t, name(m)));
  }
  if (!args.assurance.empty()) ov.assurance = open_interval_option("--assurance", args.assurance, 0.0, 1.0);
  if (!args.criterion.empty()) {
    ov.criterion = parse_criterion(args.criterion);
    if (!ov.criterion) throw BadInput("--criterion " + args.criterion + ": expected assurance or mean");
  }
  if (!args.bootstrap.empty())
    ov.bootstrap = static_cast<int>(whole_option("--bootstrap", args.bootstrap, 0, max_bootstrap));
  return ov;
}

void check_targets_measured(const Study& study, const AnswerOverrides& ov) {
  for (const auto& [m, t] : ov.targets) {
    bool measured = false;
    for (const auto& sc : study.scenarios)
      for (Measure k : sc.settings.measures) measured = measured || k == m;
    if (!measured) throw BadInput(fmt::format("--target {}: this study did not measure {}", name(m), name(m)));
  }
}

int answer_command(const AnswerArgs& args) {
  const AnswerOverrides ov = answer_overrides(args);
  const std::string& dir_text = args.dir;
  const std::filesystem::path dir(dir_text);
  if (!std::filesystem::exists(dir / "study.resolved.yaml"))
    throw BadInput(dir_text + " is not a dobudget run directory (no study.resolved.yaml)");
  if (!std::filesystem::exists(dir / "runs.csv"))
    throw BadInput(dir_text + " has no runs.csv yet: finish the run with `dobudget plan` (or `merge` its shards) first");
  const io::FinishedRun run = io::load_finished_run(dir);  // study hash and every row checked
  const Study& study = run.study;
  check_targets_measured(study, ov);
  const auto& rows = run.rows;
  const auto answers = compute_study_answers(study, rows, ov);
  io::write_answer_files(dir, study, answers);
  std::printf("%s", io::format_answer_table(answers, &study).c_str());
  std::printf("%s", io::format_pilot_choice_table(choose_pilot_policies(study, answers)).c_str());
  std::printf("\nwrote %s and %s\n\n%s\n", (dir / "answer.csv").string().c_str(), (dir / "answer.md").string().c_str(),
              caution);
  return 0;
}

}  // namespace dobudget::cli
