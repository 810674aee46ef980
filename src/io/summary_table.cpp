#include "io/summary_table.hpp"

#include <fmt/format.h>

#include <cmath>

#include "core/answer/summary.hpp"
#include "io/text_escape.hpp"

namespace dobudget::io {

namespace {

bool same(double a, double b) { return a == b || (std::isnan(a) && std::isnan(b)); }

bool same_stats(const CellSummary& a, const CellSummary& b) {
  return a.count == b.count && same(a.mean, b.mean) && same(a.sd, b.sd) && same(a.median, b.median) &&
         same(a.q10, b.q10) && same(a.q90, b.q90);
}

std::string figure(double x) { return std::isnan(x) ? std::string("-") : fmt::format("{:.4g}", x); }

}  // namespace

ReadableCells readable_cells(const std::vector<CellSummary>& cells) {
  ReadableCells out;
  auto pilot_only_at = [&](int pilot) -> const CellSummary* {  // the first pilot-only cell at this budget
    for (const auto& c : cells)
      if (c.strategy == Strategy::pilot_only && c.pilot == pilot) return &c;
    return nullptr;
  };
  bool pilot_only_once = true;  // pilot-only gives the same figures at every logged budget
  for (const auto& c : cells)
    if (c.strategy == Strategy::pilot_only) pilot_only_once = pilot_only_once && same_stats(c, *pilot_only_at(c.pilot));
  for (const auto& c : cells) {
    const CellSummary* p = pilot_only_at(c.pilot);
    const bool repeat = c.strategy == Strategy::pilot_only ? pilot_only_once && p != &c
                                                           : c.logged == 0 && p != nullptr && same_stats(*p, c);
    if (repeat) {
      ++out.left_out;
      continue;
    }
    out.cells.push_back(c);
    out.logged.push_back(c.strategy == Strategy::pilot_only && pilot_only_once ? std::string("any")
                                                                                : std::to_string(c.logged));
  }
  return out;
}

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
      const ReadableCells shown = readable_cells(summarise(mine, m));
      for (std::size_t i = 0; i < shown.cells.size(); ++i) {
        const CellSummary& c = shown.cells[i];
        out += fmt::format("  {:<13} {:>7} {:>7} {:>10} {:>10} {:>10} {:>10} {:>10}\n", name(c.strategy),
                           shown.logged[i], c.pilot, figure(c.mean), figure(c.sd), figure(c.median), figure(c.q10),
                           figure(c.q90));
      }
      if (shown.left_out > 0)
        out += "  (pilot-only is shown once (logged: any; it ignores logged data) and other strategies at logged 0 are "
               "left out (the same fit as pilot-only); runs.csv keeps every row)\n";
    }
  }
  return out;
}

}  // namespace dobudget::io
