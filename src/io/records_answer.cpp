#include "io/records_answer.hpp"

#include <fmt/format.h>

#include <cmath>
#include <filesystem>
#include <set>

#include "io/answer_table.hpp"
#include "io/text_escape.hpp"

namespace dobudget::io {

std::string records_answer_text(const Study& study, const std::vector<AnswerRow>& rows, bool markdown) {
  const Scenario& first = study.scenarios.front();
  if (!first.settings.environment.records) return {};
  const RecordsSettings& r = *first.settings.environment.records;
  const std::string file = std::filesystem::path(r.data).filename().string();
  std::set<double> concentrations;
  for (const Scenario& sc : study.scenarios)
    if (sc.settings.environment.records) concentrations.insert(sc.settings.environment.records->concentration);
  std::string cs;
  for (double c : concentrations) cs += (cs.empty() ? "" : ", ") + fmt::format("{}", c);
  std::string s;
  const std::string name = markdown ? markdown_text(file) : printable_line(file);
  const std::string lead = markdown ? "\n## From the records\n\n" : "\nfrom the records:\n";
  s += lead;
  s += fmt::format("{}worlds: {} plausible worlds per scenario drawn from the fit of {} ({} logged, {} pilot episodes), "
                   "prior concentration {}{}\n",
                   markdown ? "* " : "  ", first.settings.environment.draws, name, r.logged_episodes, r.pilot_episodes, cs,
                   concentrations.size() > 1 ? " (swept)" : "");
  s += fmt::format("{}pilot episodes already run (in the records): {}; each answer below is the total, and the more "
                   "still to run:\n",
                   markdown ? "* " : "  ", r.pilot_episodes);
  const ReadableAnswers readable = readable_answers(rows);
  for (std::size_t i = 0; i < readable.rows.size(); ++i) {
    const AnswerRow& a = readable.rows[i];
    std::string need;
    if (std::isnan(a.needed_pilot)) need = "not known (beyond the largest budget)";
    else if (std::isinf(a.needed_pilot)) need = "unreachable";
    else {
      const double total = std::ceil(a.needed_pilot);
      const char* bound = a.status == AnswerStatus::met_at_smallest && a.needed_pilot > 0.0 ? "at most " : "";
      need = fmt::format("{}{} in total, {}{} more", bound, total, bound, std::max(0.0, total - r.pilot_episodes));
    }
    const std::string scenario =
        study.scenarios.size() > 1 ? fmt::format("scenario {}, ", a.scenario) : std::string();
    s += fmt::format("{}{}{} {} at {}, {}, logged {}: {}\n", markdown ? "  * " : "    ", scenario, dobudget::name(a.measure), a.target,
                     a.criterion == Criterion::mean ? "mean" : fmt::format("assurance {}", a.assurance),
                     dobudget::name(a.strategy), readable.logged[i], need);
  }
  return s;
}

}  // namespace dobudget::io
