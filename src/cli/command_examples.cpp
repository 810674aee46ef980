#include "cli/command_examples.hpp"

namespace dobudget::cli {

const std::vector<CommandExample>& command_examples() {
  static const std::vector<CommandExample> table{
      {"check", "dobudget check configs/default.yaml", "validate, show every default, count fits, estimate the cost"},
      {"plan", "dobudget plan configs/default.yaml --threads 2", "simulate, write runs/<name>, print the answer"},
      {"plan", "dobudget plan study.yaml --out runs/study", "the same command again resumes a stopped run"},
      {"plan", "dobudget plan study.yaml --shard 3/10 --out runs/part3", "one task of a job array (then merge)"},
      {"plan", "dobudget plan study.yaml --max-core-hours 50", "refuse to start above 50 core-hours"},
      {"merge", "dobudget merge runs/part* --out runs/study", "combine the shards into one run directory"},
      {"answer", "dobudget answer runs/default --target model_kl=0.01 --assurance 0.9",
       "re-analysis from the stored rows, in seconds"},
      {"answer", "dobudget answer runs/default --criterion mean", "the mean measure meets the target"},
      {"report", "dobudget report runs/default", "figures and runs/default/report/report.md"},
      {"draw", "dobudget draw configs/default.yaml --out envs", "write the synthetic environments as model files"},
      {"simulate", "dobudget simulate configs/default.yaml --logged 500 --pilot 20 --out episodes.csv",
       "episodes of world 0 in the format dobudget imports"},
      {"fit", "dobudget fit episodes.csv --codebook codebook.yaml --out fit", "fit your own records, choose the latent size"},
  };
  return table;
}

std::string examples_text(std::string_view command) {
  constexpr std::size_t column = 48;  // notes start here when the command line is short enough
  std::string out;
  for (const CommandExample& e : command_examples()) {
    if (!command.empty() && e.command != command) continue;
    std::string line = "  " + std::string(e.line);
    if (!e.note.empty()) {
      if (line.size() + 2 <= column)
        line += std::string(column - line.size(), ' ');
      else
        line += "\n" + std::string(column, ' ');
      line += std::string(e.note);
    }
    out += line + "\n";
  }
  return out.empty() ? out : "\nExamples:\n" + out;
}

}  // namespace dobudget::cli
