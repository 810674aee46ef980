// Writers for the pilot-policy comparison; see pilot_choice_table.hpp.
#include "io/pilot_choice_table.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>

#include "io/atomic_file.hpp"
#include "io/csv.hpp"
#include "io/text_escape.hpp"

namespace dobudget::io {

namespace {

std::string cell(double x) { return std::isnan(x) ? std::string() : csv_number(x); }
std::string cell(const std::optional<double>& x) { return x ? cell(*x) : std::string(); }

std::string episodes(double x) {
  if (std::isnan(x)) return "-";
  if (std::isinf(x)) return x > 0 ? "inf" : "-inf";
  return fmt::format("{:.0f}", std::ceil(x - 1e-9 * std::abs(x)));
}

std::string signed_episodes(double x) {
  if (std::isnan(x)) return "-";
  if (std::isinf(x)) return x > 0 ? "inf" : "-inf";
  const double r = std::round(x);
  return fmt::format("{:.0f}", r == 0.0 ? 0.0 : r);
}

std::string saving(const PilotChoiceRow& r) {
  return r.saved_vs_uniform ? signed_episodes(*r.saved_vs_uniform) : std::string("-");
}

std::string interval(const PilotChoiceRow& r) {
  if (std::isnan(r.low) || std::isnan(r.high)) return "-";
  return fmt::format("[{}, {}]", signed_episodes(r.low), signed_episodes(r.high));
}

std::string all_needs(const PilotChoiceRow& r) {
  std::string s;
  for (const auto& [p, n] : r.needed) s += fmt::format("{}{} {}", s.empty() ? "" : ", ", name(p), episodes(n));
  return s;
}

std::string query(const PilotChoiceRow& r) {
  return fmt::format("{} <= {}{}", name(r.measure), r.target,
                     std::isnan(r.assurance) ? std::string(" (mean)") : fmt::format(" ({:g})", r.assurance));
}

}  // namespace

std::string pilot_choice_csv(const std::vector<PilotChoiceRow>& rows) {
  std::string s =
      "uniform_scenario,best_scenario,measure,target,assurance,criterion,strategy,logged,best_policy,needed_best,"
      "needed_uniform,saved_vs_uniform,low,high\n";
  for (const auto& r : rows)
    s += fmt::format("{},{},{},{},{},{},{},{},{},{},{},{},{},{}\n", r.uniform_scenario, r.best_scenario, name(r.measure),
                     cell(r.target), cell(r.assurance), name(r.criterion), name(r.strategy), r.logged, name(r.best),
                     cell(r.needed_best), cell(r.needed_uniform), cell(r.saved_vs_uniform), cell(r.low), cell(r.high));
  return s;
}

void write_pilot_choice_csv(const std::filesystem::path& path, const std::vector<PilotChoiceRow>& rows) {
  write_file_atomically(path, pilot_choice_csv(rows));
}

std::string format_pilot_choice_md(const std::vector<PilotChoiceRow>& rows) {
  if (rows.empty()) return {};
  std::string s =
      "\n## Which pilot to run\n\nFor each strategy and logged budget, the pilot policy that needs the fewest pilot "
      "episodes, and its saving against the uniform pilot with a paired 90% bootstrap interval (the same resampled "
      "environment draws and replicates for both policies; the sampling part of the spread only).\n\n"
      "| scenarios | query | strategy | logged | best policy | needed | uniform needs | saved vs uniform | interval | "
      "every policy |\n|---|---|---|---:|---|---:|---:|---:|---|---|\n";
  for (const auto& r : rows)
    s += fmt::format("| {} | {} | {} | {} | {} | {} | {} | {} | {} | {} |\n",
                     r.others.empty() ? std::string("all") : markdown_text(r.others), query(r), name(r.strategy),
                     r.logged, name(r.best), episodes(r.needed_best), episodes(r.needed_uniform), saving(r),
                     interval(r), all_needs(r));
  return s;
}

std::string format_pilot_choice_table(const std::vector<PilotChoiceRow>& rows) {
  if (rows.empty()) return {};
  std::vector<std::vector<std::string>> cells{{"scenarios", "query", "strategy", "logged", "best policy", "needed",
                                               "uniform", "saved", "interval", "every policy"}};
  for (const auto& r : rows)
    cells.push_back({r.others.empty() ? std::string("all") : printable_line(r.others), query(r),
                     std::string(name(r.strategy)), std::to_string(r.logged), std::string(name(r.best)),
                     episodes(r.needed_best), episodes(r.needed_uniform), saving(r), interval(r), all_needs(r)});
  std::vector<std::size_t> width(cells.front().size(), 0);
  for (const auto& line : cells)
    for (std::size_t i = 0; i < line.size(); ++i) width[i] = std::max(width[i], line[i].size());
  std::string s = "\nwhich pilot to run (fewest pilot episodes; saving against uniform, paired 90% bootstrap):\n";
  for (const auto& line : cells) {
    std::string l;
    for (std::size_t i = 0; i < line.size(); ++i)
      l += line[i] + (i + 1 < line.size() ? std::string(width[i] - line[i].size() + 2, ' ') : std::string());
    s += l + "\n";
  }
  return s;
}

}  // namespace dobudget::io
