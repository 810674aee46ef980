// dobudget answer: recompute the answer from a finished run directory, no simulation.
#include <fmt/format.h>

#include <cstdio>

#include "cli/commands.hpp"
#include "core/answer.hpp"
#include "io/answer_table.hpp"
#include "io/runs_table.hpp"
#include "io/study_file.hpp"

namespace dobudget::cli {
namespace {

// "model_kl=0.01" -> (model_kl, 0.01)
std::pair<Measure, double> parse_target(const std::string& text) {
  const auto eq = text.find('=');
  const auto m = parse_measure(text.substr(0, eq == std::string::npos ? 0 : eq));
  try {
    std::size_t used = 0;
    if (eq == std::string::npos || !m) throw std::invalid_argument("");
    const double v = std::stod(text.substr(eq + 1), &used);
    if (used != text.size() - eq - 1 || !(v > 0.0)) throw std::invalid_argument("");
    return {*m, v};
  } catch (const std::logic_error&) {
    throw BadInput("--target " + text + ": expected MEASURE=VALUE with MEASURE model_kl or return_gap and VALUE > 0");
  }
}

}  // namespace

int answer_command(const AnswerArgs& args) {
  const std::string& dir_text = args.dir;
  const std::vector<std::string>& targets = args.targets;
  const double assurance = args.assurance;
  const std::string& criterion = args.criterion;
  const int bootstrap = args.bootstrap;
  const std::filesystem::path dir(dir_text);
  if (!std::filesystem::exists(dir / "study.resolved.yaml"))
    throw BadInput(dir_text + " is not a dobudget run directory (no study.resolved.yaml)");
  if (!std::filesystem::exists(dir / "runs.csv"))
    throw BadInput(dir_text + " has no runs.csv yet: finish the run with `dobudget plan` (or `merge` its shards) first");
  const Study study = io::load_study(dir / "study.resolved.yaml");
  AnswerOverrides ov;
  for (const auto& t : targets) ov.targets.insert(parse_target(t));
  if (assurance > 0.0) {
    if (!(assurance < 1.0)) throw BadInput("--assurance must be in (0, 1)");
    ov.assurance = assurance;
  }
  if (!criterion.empty()) {
    ov.criterion = parse_criterion(criterion);
    if (!ov.criterion) throw BadInput("--criterion " + criterion + ": expected assurance or mean");
  }
  if (bootstrap >= 0) ov.bootstrap = bootstrap;
  for (const auto& [m, t] : ov.targets) {
    bool measured = false;
    for (const auto& sc : study.scenarios)
      for (Measure k : sc.settings.measures) measured = measured || k == m;
    if (!measured) throw BadInput(fmt::format("--target {}: this study did not measure {}", name(m), name(m)));
  }
  const auto rows = io::read_runs(dir / "runs.csv");
  const auto answers = compute_study_answers(study, rows, ov);
  io::write_answer_files(dir, study, answers);
  std::printf("%s", io::format_answer_table(answers, &study).c_str());
  std::printf("\nwrote %s and %s\n\n%s\n", (dir / "answer.csv").string().c_str(), (dir / "answer.md").string().c_str(),
              caution);
  return 0;
}

}  // namespace dobudget::cli
