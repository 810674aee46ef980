// answer.csv, answer.md and the terminal table; see answer_table.hpp.
#include "io/answer_table.hpp"

#include "io/atomic_file.hpp"

#include "io/csv.hpp"
#include "io/pilot_choice_table.hpp"
#include "io/records_answer.hpp"
#include "io/text_escape.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <stdexcept>
#include <system_error>
#include <tuple>

namespace dobudget::io {

namespace {

// ---- CSV cells -------------------------------------------------------------------------------

// io/csv.hpp's shortest round-trip number, with NaN (a missing value here) as an empty cell.
std::string cell(double x) { return std::isnan(x) ? std::string() : csv_number(x); }
std::string cell(const std::optional<double>& x) { return x ? cell(*x) : std::string(); }

// ---- human-readable cells (answer.md and the terminal) ---------------------------------------

std::string human_episodes(double x) {  // whole episodes, rounded up
  if (std::isnan(x)) return "-";
  if (std::isinf(x)) return x > 0 ? "inf" : "-inf";
  const double r = std::ceil(x - 1e-9 * std::abs(x));
  if (std::abs(r) >= 1e7) return fmt::format("{:.3g}", r);
  return fmt::format("{:.0f}", r);
}

std::string human_signed_episodes(const std::optional<double>& x) {  // saved episodes, rounded
  if (!x) return "-";
  if (std::isinf(*x)) return *x > 0 ? "inf" : "-inf";
  if (std::abs(*x) >= 1e7) return fmt::format("{:.3g}", *x);
  const double r = std::round(*x);
  return fmt::format("{:.0f}", r == 0.0 ? 0.0 : r);  // no "-0"
}

std::string human_value(const std::optional<double>& x, const char* spec = "{:.4g}") {
  if (!x || std::isnan(*x)) return "-";
  if (std::isinf(*x)) return *x > 0 ? "inf" : "-inf";
  return fmt::format(fmt::runtime(spec), *x);
}

std::string human_needed(const AnswerRow& r) {
  const std::string n = human_episodes(r.needed_pilot);
  // Met at a smallest budget of 0 is exact: no pilot episodes are needed.
  if (r.status == AnswerStatus::met_at_smallest && r.needed_pilot > 0.0) return "<= " + n;
  if (r.status == AnswerStatus::not_reached) return "> largest budget";
  return n;
}

// An interval whose lower end lies below the smallest simulated budget (the crossing may be
// anywhere down to 0) shows that end as an upper bound, `<= n`; if the upper end is that budget
// too, the whole interval is `<= n`.
std::string human_interval(const AnswerRow& r) {
  if (std::isnan(r.low) && std::isnan(r.high)) return "-";
  const bool below_grid = r.smallest > 0.0 && r.low < r.smallest;
  const std::string low = below_grid ? "<= " + human_episodes(r.smallest) : human_episodes(r.low);
  if (below_grid && r.high <= r.smallest) return low;
  return fmt::format("[{}, {}]", low, human_episodes(r.high));
}

bool same_number(double a, double b) { return a == b || (std::isnan(a) && std::isnan(b)); }

// Same scenario and query (measure, target, assurance, criterion, interval).
bool same_query(const AnswerRow& a, const AnswerRow& b) {
  return a.scenario == b.scenario && a.measure == b.measure && a.target == b.target &&
         same_number(a.assurance, b.assurance) && a.criterion == b.criterion && a.interval == b.interval;
}

// The same answer: need, interval and status.
bool same_answer(const AnswerRow& a, const AnswerRow& b) {
  return same_number(a.needed_pilot, b.needed_pilot) && same_number(a.low, b.low) && same_number(a.high, b.high) &&
         a.status == b.status;
}

// Fewer draws than few_draws (answer.hpp) from the synthetic family: the smallest such count, or 0.
int fewest_draws(const std::vector<AnswerRow>& rows) {
  int fewest = 0;
  for (const auto& r : rows)
    if (r.family_draws && r.draws < few_draws && (fewest == 0 || r.draws < fewest)) fewest = r.draws;
  return fewest;
}

std::string few_draws_warning(int draws) {
  return fmt::format(
      "these answers rest on {} environment draw{} (fewer than {}): the intervals understate the spread between "
      "worlds; raise environment.draws for intervals that cover",
      draws, draws == 1 ? "" : "s", few_draws);
}

std::string percent(double x) { return fmt::format("{:g}%", std::round(x * 1000.0) / 10.0); }

std::string human_share(const std::optional<double>& x) { return x ? percent(*x) : std::string("-"); }

std::string criterion_sentence(const AnswerRow& r) {
  if (r.criterion == Criterion::mean)
    return fmt::format("Criterion `mean`: the mean {} across (environment draw, replicate) pairs is at most {}.",
                       name(r.measure), r.target);
  return fmt::format(
      "Criterion `assurance`: at least {} of (environment draw, replicate) pairs have {} at most {}.",
      percent(r.assurance), name(r.measure), r.target);
}

// Rows of one table in answer.md: same scenario and query.
using GroupKey = std::tuple<int, Measure, double, double, Criterion, double>;

GroupKey group_key(const AnswerRow& r) {
  // NaN assurance (mean criterion) would never compare equal: use 0 in the key.
  return {r.scenario, r.measure, r.target, std::isnan(r.assurance) ? 0.0 : r.assurance, r.criterion, r.interval};
}

}  // namespace

ReadableAnswers readable_answers(const std::vector<AnswerRow>& rows) {
  ReadableAnswers out;
  auto pilot_only_of = [&](const AnswerRow& r) -> const AnswerRow* {  // the first pilot-only row of r's query
    for (const auto& p : rows)
      if (p.strategy == Strategy::pilot_only && same_query(p, r)) return &p;
    return nullptr;
  };
  for (const auto& r : rows) {
    const AnswerRow* p = pilot_only_of(r);
    if (r.strategy == Strategy::pilot_only) {
      // Once, if every pilot-only row of the query gives the same answer (it ignores logged data).
      bool all_same = true;
      for (const auto& q : rows)
        if (q.strategy == Strategy::pilot_only && same_query(q, r)) all_same = all_same && same_answer(q, r);
      if (all_same && p != &r) {
        ++out.left_out;
        continue;
      }
      out.rows.push_back(r);
      out.logged.push_back(all_same ? std::string("any") : std::to_string(r.logged));
      continue;
    }
    if (r.logged == 0 && p != nullptr && same_answer(*p, r)) {  // the pilot-only fit: shown once already
      ++out.left_out;
      continue;
    }
    out.rows.push_back(r);
    out.logged.push_back(std::to_string(r.logged));
  }
  return out;
}

std::string_view readable_answers_note() {
  return "pilot-only is shown once (logged: any; it ignores logged data) and other strategies at logged 0 are left "
         "out (the same fit as pilot-only); answer.csv keeps every row";
}

std::string_view answer_csv_header() {
  return "scenario,measure,target,assurance,strategy,logged,needed_pilot,low,high,status,"
         "floor,saved_vs_pilot_only,exchange_rate,pairs,criterion,draws,unconfirmed,pilot_policy";
}

std::string answer_csv_line(const AnswerRow& r) {
  return fmt::format("{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{}", r.scenario, name(r.measure), cell(r.target),
                     cell(r.assurance), name(r.strategy), r.logged, cell(r.needed_pilot), cell(r.low), cell(r.high),
                     name(r.status), cell(r.floor), cell(r.saved_vs_pilot_only), cell(r.exchange_rate), r.pairs,
                     name(r.criterion), r.draws, cell(r.unconfirmed), name(r.pilot_policy));
}

void write_answer_csv(const std::filesystem::path& path, const std::vector<AnswerRow>& rows) {
  std::string s(answer_csv_header());
  s += '\n';
  for (const auto& r : rows) {
    s += answer_csv_line(r);
    s += '\n';
  }
  write_file_atomically(path, s);
}

std::string format_answer_md(const std::string& study_name, const std::vector<std::string>& scenario_labels,
                             const std::vector<AnswerRow>& rows) {
  // The study name and the labels are user text: markdown_text (text_escape.hpp).
  std::string s = fmt::format("# Pilot episodes needed: {}\n\n", markdown_text(study_name));
  s +=
      "How many pilot (interventional) episodes each way of using the data needs so that the fitted model "
      "meets the target, for each logged budget. Budgets are in episodes; needed values are rounded up to "
      "whole episodes here (answer.csv keeps the unrounded values).\n";
  if (rows.empty()) s += "\nNo answers: no run records with values for the requested measures.\n";
  const ReadableAnswers readable = readable_answers(rows);
  if (readable.left_out > 0) s += fmt::format("\nIn the tables below, {}.\n", readable_answers_note());

  // Groups in order of first appearance.
  std::vector<GroupKey> keys;
  for (const auto& r : readable.rows)
    if (std::find(keys.begin(), keys.end(), group_key(r)) == keys.end()) keys.push_back(group_key(r));
  int current_scenario = -1;
  bool any_extrapolated = false;
  for (const auto& key : keys) {
    const int sc = std::get<0>(key);
    const AnswerRow* first = nullptr;
    std::vector<AnswerRow> group;
    for (const auto& r : readable.rows)
      if (group_key(r) == key) {
        if (first == nullptr) first = &r;
        group.push_back(r);
      }
    if (sc != current_scenario || current_scenario == -1) {
      current_scenario = sc;
      const bool labelled = sc >= 0 && static_cast<std::size_t>(sc) < scenario_labels.size() &&
                            !scenario_labels[static_cast<std::size_t>(sc)].empty();
      s += labelled ? fmt::format("\n## Scenario {}: {}\n", sc, markdown_text(scenario_labels[static_cast<std::size_t>(sc)]))
                    : fmt::format("\n## Scenario {}\n", sc);
    }
    s += fmt::format("\n### {} at most {} ({})\n\n{}\n\n", name(first->measure), first->target,
                     first->criterion == Criterion::mean ? std::string("mean criterion")
                                                         : "assurance " + percent(first->assurance),
                     criterion_sentence(*first));
    if (const int fewest = fewest_draws(group); fewest > 0) s += fmt::format("**Few environment draws**: {}.\n\n", few_draws_warning(fewest));
    s += fmt::format(
        "| strategy | logged | needed pilot | {} interval | status | floor | saved vs pilot-only | "
        "saved per logged episode | pairs | draws | unconfirmed fits |\n",
        percent(first->interval));
    s += "|---|---:|---:|---|---|---:|---:|---:|---:|---:|---:|\n";
    for (std::size_t i = 0; i < readable.rows.size(); ++i) {
      const AnswerRow& r = readable.rows[i];
      if (group_key(r) != key) continue;
      any_extrapolated = any_extrapolated || r.status == AnswerStatus::extrapolated;
      s += fmt::format("| {} | {} | {} | {} | {} | {} | {} | {} | {} | {} | {} |\n", name(r.strategy), readable.logged[i],
                       human_needed(r), human_interval(r), name(r.status), human_value(r.floor),
                       human_signed_episodes(r.saved_vs_pilot_only), human_value(r.exchange_rate, "{:.3g}"),
                       r.pairs, r.draws, human_share(r.unconfirmed));
    }
  }

  if (scenario_labels.size() > 1 && !rows.empty()) {
    s += "\n## Worst case over the scenarios\n\nFor each target, strategy and logged budget, the scenario that "
         "needs the most pilot episodes: the budget to plan for when the swept quantity is unknown.\n\n";
    s += "| measure | target | criterion | strategy | logged | needed pilot | interval | status | worst at |\n";
    s += "|---|---:|---|---|---:|---:|---|---|---|\n";
    const ReadableAnswers worst = readable_answers(worst_case_over_scenarios(rows));
    for (std::size_t i = 0; i < worst.rows.size(); ++i) {
      const AnswerRow& r = worst.rows[i];
      const auto sc = static_cast<std::size_t>(r.scenario);
      s += fmt::format("| {} | {} | {} | {} | {} | {} | {} | {} | {} |\n", name(r.measure), r.target,
                       r.criterion == Criterion::mean ? std::string("mean") : "assurance " + percent(r.assurance),
                       name(r.strategy), worst.logged[i], human_needed(r), human_interval(r), name(r.status),
                       sc < scenario_labels.size() ? markdown_text(scenario_labels[sc]) : std::to_string(r.scenario));
    }
  }

  s += R"(
## How to read this

* **needed pilot**: the smallest pilot budget at which the criterion holds. Under `assurance`, the
  fraction of (environment draw, replicate) pairs whose measure is at most the target is made
  non-decreasing in the budget (isotonic regression) and the budget where it reaches the assurance
  is interpolated linearly in log(budget) between the simulated budgets. Under `mean`, the mean
  measure across pairs is made non-increasing and the budget where it reaches the target is
  interpolated the same way.
* **status**:
  * `met-at-smallest`: the criterion already holds at the smallest simulated budget. The value
    shown (`<= n`) is an upper bound: fewer pilot episodes may do, but the simulation cannot tell
    (a smallest budget of 0 is exact: no pilot episodes are needed).
  * `reached`: the criterion is met between two simulated budgets (interpolated).
  * `extrapolated`: even the largest simulated budget falls short; a learning curve
    e(n) = c + a n^(-b) fitted to the measure across budgets (to its assurance-quantile under
    `assurance`, to its mean under `mean`) has a floor c below the target, and the budget where the
    curve meets the target is shown. It lies beyond the simulated range: treat it as a rough guide
    and simulate larger budgets to confirm.
  * `unreachable`: the fitted floor c is at or above the target: more pilot episodes of this kind
    are not expected to get there (needed = inf). The floor is shown.
  * `not-reached`: the largest budget falls short and too few budgets have data to fit a curve.
* **interval**: two-stage percentile bootstrap interval: each resample draws environment draws
  with replacement, then replicates with replacement within each drawn world, and recomputes the
  whole answer. It also carries where the crossing lies between the two simulated budgets around
  it: each resample counts from the budget below its crossing to the budget above, so the interval
  is at least as wide as the gap between simulated budgets there, and narrows only with budgets
  closer together. A lower end `<= n` lies below the smallest simulated budget; resamples that
  never reach the target count as infinite, so an end of `inf` means that a sizeable share of
  resamples did not reach it.
* **floor**: the fitted c, shown whenever a learning curve was fitted.
* **saved vs pilot-only**: pilot episodes saved by using the logged episodes this way, against
  pilot-only (which ignores logged data); negative when the strategy needs more. **saved per logged
  episode** is the exchange rate, saved / logged (not defined without logged episodes).
* **pairs**: the (environment draw, replicate) pairs with a value of the measure. Pairs without one
  (e.g. `return_gap` when planning cannot beat the uniform policy by a meaningful margin) are left
  out of every fraction and mean.
* **draws**: the environment draws (worlds) the pairs come from. Most of the spread can lie between
  worlds, which only more draws reveal: with fewer than 10 draws of the synthetic family, the
  interval understates it (a given model is one world: its interval covers replicates only).
* **unconfirmed fits**: the share of this row's model fits (every pair and pilot budget) whose best
  optimum was reached by only one EM start, even after the most starts allowed (`fit.max_restarts`):
  a better fit may exist, and the needed budget may then be too high. Above a few percent, raise
  `fit.max_restarts` and plan again.
)";
  if (any_extrapolated)
    s += "\nSome answers above are extrapolated beyond the simulated budgets; see `extrapolated`.\n";
  s += R"(
## Caution

This is a simulation under stated assumptions (the synthetic family or the given model, the logging model, the pilot policy); it is no substitute for a qualified statistician, for ethics review, or for local regulations on trials.
)";
  return s;
}

void write_answer_md(const std::filesystem::path& path, const std::string& study_name,
                     const std::vector<std::string>& scenario_labels, const std::vector<AnswerRow>& rows) {
  write_file_atomically(path, format_answer_md(study_name, scenario_labels, rows));
}

namespace {

std::string aligned(const std::vector<std::vector<std::string>>& cells, const std::vector<bool>& right) {
  std::vector<std::size_t> width(cells.front().size(), 0);
  for (const auto& line : cells)
    for (std::size_t c = 0; c < line.size(); ++c) width[c] = std::max(width[c], line[c].size());
  std::string s;
  for (const auto& line : cells) {
    std::string text;
    for (std::size_t c = 0; c < line.size(); ++c) {
      if (c > 0) text += "  ";
      const std::string pad(width[c] - line[c].size(), ' ');
      text += right[c] ? pad + line[c] : line[c] + pad;
    }
    while (!text.empty() && text.back() == ' ') text.pop_back();
    s += text;
    s += '\n';
  }
  return s;
}

// Scenario columns: the index, or one column per swept key with its value.
std::vector<std::string> scenario_header(const Study* study) {
  if (study == nullptr || study->scenarios.size() < 2 || study->scenarios.front().assignments.empty())
    return {"scenario"};
  std::vector<std::string> h;
  for (const auto& [key, value] : study->scenarios.front().assignments) h.push_back(printable_line(key));
  return h;
}

std::vector<std::string> scenario_cells(const Study* study, int scenario) {
  if (study == nullptr || study->scenarios.size() < 2 || study->scenarios.front().assignments.empty())
    return {std::to_string(scenario)};
  std::vector<std::string> c;
  for (const auto& [key, value] : study->scenarios.at(static_cast<std::size_t>(scenario)).assignments)
    c.push_back(printable_line(value));
  return c;
}

std::vector<std::string> answer_cells(const AnswerRow& r, const std::string& logged) {
  const std::string crit = r.criterion == Criterion::mean ? std::string("mean") : fmt::format("assurance {}", r.assurance);
  return {std::string(name(r.measure)), fmt::format("{}", r.target), crit, std::string(name(r.strategy)),
          logged, human_needed(r), human_interval(r), std::string(name(r.status)),
          human_signed_episodes(r.saved_vs_pilot_only), human_value(r.exchange_rate, "{:.3g}"), std::to_string(r.pairs),
          std::to_string(r.draws), human_share(r.unconfirmed)};
}

const std::vector<std::string> answer_header{"measure", "target",   "criterion", "strategy", "logged",
                                             "needed",  "interval", "status",    "saved",    "per logged",
                                             "pairs",   "draws",    "unconfirmed"};
const std::vector<bool> answer_right{false, true, false, false, true, true, false, false, true, true, true, true, true};

}  // namespace

std::vector<AnswerRow> worst_case_over_scenarios(const std::vector<AnswerRow>& rows) {
  std::vector<AnswerRow> worst;
  auto same_cell = [](const AnswerRow& a, const AnswerRow& b) {
    const bool same_assurance = a.assurance == b.assurance || (std::isnan(a.assurance) && std::isnan(b.assurance));
    return a.measure == b.measure && a.target == b.target && same_assurance && a.criterion == b.criterion &&
           a.strategy == b.strategy && a.logged == b.logged && a.pilot_policy == b.pilot_policy;  // per policy
  };
  auto worse = [](const AnswerRow& a, const AnswerRow& b) {  // a needs more than b
    if (std::isnan(a.needed_pilot)) return !std::isnan(b.needed_pilot);
    return !std::isnan(b.needed_pilot) && a.needed_pilot > b.needed_pilot;
  };
  for (const auto& r : rows) {
    auto it = std::find_if(worst.begin(), worst.end(), [&](const AnswerRow& w) { return same_cell(w, r); });
    if (it == worst.end()) worst.push_back(r);
    else if (worse(r, *it)) *it = r;
  }
  return worst;
}

std::string format_answer_table(const std::vector<AnswerRow>& rows, const Study* study) {
  const std::vector<std::string> sh = scenario_header(study);
  std::vector<std::vector<std::string>> cells;
  std::vector<std::string> header = sh;
  header.insert(header.end(), answer_header.begin(), answer_header.end());
  std::vector<bool> right(sh.size(), sh.size() == 1 && sh.front() == "scenario");
  right.insert(right.end(), answer_right.begin(), answer_right.end());
  cells.push_back(header);
  const ReadableAnswers readable = readable_answers(rows);
  for (std::size_t i = 0; i < readable.rows.size(); ++i) {
    const AnswerRow& r = readable.rows[i];
    auto line = scenario_cells(study, r.scenario);
    const auto a = answer_cells(r, readable.logged[i]);
    line.insert(line.end(), a.begin(), a.end());
    cells.push_back(line);
  }
  std::string s = aligned(cells, right);
  if (readable.left_out > 0) s += fmt::format("({})\n", readable_answers_note());
  if (const int fewest = fewest_draws(rows); fewest > 0) s += fmt::format("warning: {}\n", few_draws_warning(fewest));
  if (study != nullptr && study->scenarios.size() > 1) {
    std::vector<std::vector<std::string>> w;
    std::vector<std::string> h = answer_header;
    h.insert(h.begin(), "worst at");
    w.push_back(h);
    const ReadableAnswers worst = readable_answers(worst_case_over_scenarios(rows));
    for (std::size_t i = 0; i < worst.rows.size(); ++i) {
      const AnswerRow& r = worst.rows[i];
      auto line = answer_cells(r, worst.logged[i]);
      line.insert(line.begin(), printable_line(study->scenarios.at(static_cast<std::size_t>(r.scenario)).label));
      w.push_back(line);
    }
    std::vector<bool> wr = answer_right;
    wr.insert(wr.begin(), false);
    s += "\nworst case over the swept scenarios (the pilot budget to plan for when the swept quantity is unknown):\n";
    s += aligned(w, wr);
  }
  if (study != nullptr) s += records_answer_text(*study, rows, false);  // studies from records (issue 9)
  return s;
}

}  // namespace dobudget::io

namespace dobudget::io {

void write_answer_files(const std::filesystem::path& dir, const Study& study, const std::vector<AnswerRow>& rows) {
  std::vector<std::string> labels;
  for (const auto& sc : study.scenarios) labels.push_back(sc.label);
  write_answer_csv(dir / "answer.csv", rows);
  // With pilot policies compared, pilot_choice.csv and a section of answer.md; a study from records
  // adds its section (records_answer.hpp).
  const std::vector<PilotChoiceRow> choices = choose_pilot_policies(study, rows);
  if (!choices.empty()) write_pilot_choice_csv(dir / "pilot_choice.csv", choices);
  write_file_atomically(dir / "answer.md",
                        format_answer_md(study.name, labels, rows) + format_pilot_choice_md(choices) +
                            records_answer_text(study, rows, true));
}

std::string needed_text(const AnswerRow& row) { return human_needed(row); }
std::string interval_text(const AnswerRow& row) { return human_interval(row); }

}  // namespace dobudget::io
