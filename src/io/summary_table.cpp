#include "io/summary_table.hpp"

#include <fmt/format.h>

#include "core/summary.hpp"
#include "io/text_escape.hpp"

namespace dobudget::io {

std::string format_summary(const Study& study, const std::vector<RunRecord>& rows) {
  std::string out;
  for (const auto& sc : study.scenarios) {
    std::vector<RunRecord> mine;
    for (const auto& r : rows)
      if (r.scenario == sc.index) mine.push_back(r);
    // The label is user text: printable_line keeps control characters off the terminal.
    if (study.scenarios.size() > 1) out += fmt::format("scenario {}: {}\n", sc.index, printable_line(sc.label));
    for (Measure m : sc.settings.measures) {
      out += fmt::format("{} over {} environment draws x {} replicates (lower is better)\n", name(m),
                         sc.settings.environment.given ? 1 : sc.settings.environment.draws, sc.settings.replicates);
      out += fmt::format("  {:<13} {:>7} {:>7} {:>10} {:>10} {:>10} {:>10} {:>10}\n", "strategy", "logged", "pilot", "mean",
                         "sd", "median", "q10", "q90");
      for (const auto& c : summarise(mine, m))
        out += fmt::format("  {:<13} {:>7} {:>7} {:>10.4g} {:>10.4g} {:>10.4g} {:>10.4g} {:>10.4g}\n", name(c.strategy),
                           c.logged, c.pilot, c.mean, c.sd, c.median, c.q10, c.q90);
    }
  }
  return out;
}

}  // namespace dobudget::io
