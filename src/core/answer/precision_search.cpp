#include "core/answer/precision_search.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <set>
#include <stdexcept>
#include <string>

namespace dobudget {
namespace {

// The most draws and replicates a scaled design may reach (the study reader's limits).
constexpr long long max_scaled = 100000;

int scaled_draws(const ScenarioSettings& s, int scale) { return s.environment.given ? 1 : s.environment.draws * scale; }

// Budgets strictly inside (lo, hi) splitting it into up to 4 parts in log(budget), so that
// neighbours are at most (1 + relative) apart where whole episodes allow; a gap from 0 gets hi/2, hi/4.
void split_gap(int lo, int hi, double relative, std::set<int>& out) {
  if (hi - lo <= 1) return;
  if (lo == 0) {
    for (int d : {2, 4})
      if (const int n = hi / d; n > 0 && n < hi) out.insert(n);
    return;
  }
  const double ratio = static_cast<double>(hi) / lo;
  if (ratio <= 1.0 + relative) return;
  const int parts = std::min(4, static_cast<int>(std::ceil(std::log(ratio) / std::log1p(relative))));
  for (int j = 1; j < parts; ++j) {
    const int n = static_cast<int>(std::lround(lo * std::pow(ratio, static_cast<double>(j) / parts)));
    if (n > lo && n < hi) out.insert(n);
  }
}

}  // namespace

std::vector<int> coarse_grid(const PilotRange& range) {
  constexpr int points = 5;
  std::vector<int> out;
  const double ratio = static_cast<double>(range.to) / range.from;
  for (int k = 0; k < points; ++k) {
    const int n = k == points - 1 ? range.to
                                  : static_cast<int>(std::lround(range.from * std::pow(ratio, static_cast<double>(k) / (points - 1))));
    if (out.empty() || n > out.back()) out.push_back(n);
  }
  return out;
}

SearchDesign first_design(const Study& range_study) {
  if (!range_study.precision || !range_study.scenarios.front().settings.pilot_range)
    throw std::invalid_argument("first_design: not a range-mode study");
  SearchDesign d;
  d.budgets = coarse_grid(*range_study.scenarios.front().settings.pilot_range);
  d.rounds.assign(d.budgets.size(), 1);
  return d;
}

Study round_study(const Study& range_study, const SearchDesign& design) {
  Study out = range_study;
  out.precision.reset();
  for (Scenario& sc : out.scenarios) {
    ScenarioSettings& s = sc.settings;
    s.pilot_range.reset();
    s.pilot_budgets = design.budgets;
    s.pilot_rounds = design.rounds;
    if (!s.environment.given) s.environment.draws *= design.draws_scale;
    s.replicates *= design.replicates_scale;
    sc.label.clear();
    for (auto& [key, value] : sc.assignments) {
      if (key == "environment.draws") value = std::to_string(s.environment.draws);
      if (key == "replicates") value = std::to_string(s.replicates);
      sc.label += (sc.label.empty() ? "" : ", ") + key + "=" + value;
    }
  }
  return out;
}

bool unit_in_design(const Study& range_study, const SearchDesign& earlier, const UnitId& u) {
  const ScenarioSettings& s = range_study.scenarios[static_cast<std::size_t>(u.scenario)].settings;
  return u.draw < scaled_draws(s, earlier.draws_scale) && u.replicate < s.replicates * earlier.replicates_scale;
}

SearchStep plan_next_round(const Study& range_study, const SearchDesign& current, const std::vector<AnswerRow>& answers) {
  if (!range_study.precision) throw std::invalid_argument("plan_next_round: not a range-mode study");
  const double relative = range_study.precision->relative;
  const PilotRange range = *range_study.scenarios.front().settings.pilot_range;
  const std::vector<int>& grid = current.budgets;
  // 0 pilot episodes can be fitted only where logged episodes exist (study_file.cpp).
  const bool zero_allowed = std::all_of(range_study.scenarios.begin(), range_study.scenarios.end(),
                                        [](const Scenario& sc) { return sc.settings.logged_budgets.back() > 0; });
  const int lowest = zero_allowed ? 0 : 1;
  const bool family = std::any_of(range_study.scenarios.begin(), range_study.scenarios.end(),
                                  [](const Scenario& sc) { return !sc.settings.environment.given; });

  SearchStep step;
  std::set<int> add;            // budgets asked for
  double sample_factor = 1.0;   // the largest (2 x sampling part / relative)^2 asked for
  const auto refine = [&](double lo, double hi) {
    for (std::size_t i = 0; i + 1 < grid.size(); ++i)
      if (grid[i + 1] > lo && grid[i] < hi) split_gap(grid[i], grid[i + 1], relative, add);
  };
  const auto above = [&](double up_to) {
    // Up to 3 budgets from the largest towards min(to, up_to), evenly in log(budget).
    const double top = std::min<double>(range.to, std::max<double>(up_to, grid.back() + 1.0));
    if (grid.back() >= range.to) return false;
    const double ratio = top / grid.back();
    for (int j = 1; j <= 3; ++j) {
      const int n = static_cast<int>(std::lround(grid.back() * std::pow(ratio, j / 3.0)));
      if (n > grid.back() && n <= range.to) add.insert(n);
    }
    return true;
  };

  for (const AnswerRow& row : answers) {
    PrecisionVerdict v;
    v.row = row;
    v.half_width = relative_half_width(row);
    v.met = v.half_width <= relative;
    if (v.met) {
      v.why = "met";
      step.verdicts.push_back(v);
      continue;
    }
    switch (row.status) {
      case AnswerStatus::unreachable:
      case AnswerStatus::not_reached:
      case AnswerStatus::extrapolated: {
        const double guess = row.status == AnswerStatus::extrapolated ? 2.0 * row.needed_pilot : range.to;
        v.why = above(guess) ? "budgets: the crossing lies above the largest simulated budget; adding budgets up to "
                                   "budgets.pilot.to"
                             : "not within budgets.pilot.to: the crossing lies above the range (" +
                                   std::string(name(row.status)) + "); raise budgets.pilot.to";
        break;
      }
      case AnswerStatus::met_at_smallest:
      case AnswerStatus::reached: {
        const double bracket = row.needed_pilot > 0.0 ? (row.bracket_high - row.bracket_low) / 2.0 / row.needed_pilot
                                                      : std::numeric_limits<double>::infinity();
        const double sampling = row.needed_pilot > 0.0 && !std::isnan(row.sampling_low) && !std::isnan(row.sampling_high)
                                    ? (row.sampling_high - row.sampling_low) / 2.0 / row.needed_pilot
                                    : 0.0;
        const std::size_t before = add.size();
        std::string why;
        if (row.status == AnswerStatus::met_at_smallest && grid.front() > lowest) {
          // Met at the smallest budget: search downward, to 0 when logged episodes allow it.
          add.insert(lowest);
          for (int d : {2, 4})
            if (const int n = grid.front() / d; n > lowest) add.insert(n);
          why = "budgets: met at the smallest budget; searching downward";
        } else {
          const double hi = std::isinf(row.high) || std::isnan(row.high) ? range.to : row.high;
          const double lo = std::isnan(row.low) ? row.bracket_low : row.low;
          refine(std::min(lo, row.bracket_low), std::max(hi, row.bracket_high));
          if (add.size() > before)
            why = bracket > relative ? "budgets: the simulated budgets around the crossing are too far apart"
                                     : "budgets: the interval spans simulated budgets too far apart";
        }
        if (std::isinf(sampling) || sampling > relative / 2.0) {
          const double want = std::isinf(sampling) ? 4.0 : std::pow(2.0 * sampling / relative, 2.0);
          sample_factor = std::max(sample_factor, want);
          why += std::string(why.empty() ? "" : "; ") +
                 (family ? "draws: the spread between worlds keeps the interval wide"
                         : "replicates: the sampling spread keeps the interval wide");
        }
        if (why.empty()) why = "the budgets around the crossing are whole episodes apart and the samples are enough: "
                               "the interval cannot narrow further";
        v.why = why;
        break;
      }
    }
    step.verdicts.push_back(v);
  }

  SearchDesign next = current;
  next.round = current.round + 1;
  // Budgets, as long as the list may hold them (the smallest first: cheaper, and where downward
  // searches and early crossings are).
  std::vector<std::pair<int, int>> merged;
  for (std::size_t i = 0; i < grid.size(); ++i) merged.emplace_back(grid[i], current.rounds[i]);
  bool list_full = false;
  for (int n : add) {
    if (std::binary_search(grid.begin(), grid.end(), n)) continue;
    if (static_cast<int>(merged.size()) >= max_search_budgets) {
      list_full = true;
      break;
    }
    merged.emplace_back(n, next.round);
  }
  std::sort(merged.begin(), merged.end());
  next.budgets.clear();
  next.rounds.clear();
  for (const auto& [n, r] : merged) {
    next.budgets.push_back(n);
    next.rounds.push_back(r);
  }
  const bool budgets_added = next.budgets.size() > grid.size();
  // Samples: draws for the synthetic family (the spread between worlds dominates on this model
  // class: DEVELOPERS.md, "Answer"), replicates for a given model.
  bool samples_full = false;
  if (sample_factor > 1.0) {
    const int factor = static_cast<int>(std::clamp(std::ceil(sample_factor), 2.0, 4.0));
    int& scale = family ? next.draws_scale : next.replicates_scale;
    long long largest = 0;
    for (const Scenario& sc : range_study.scenarios)
      largest = std::max<long long>(largest, family ? sc.settings.environment.draws : sc.settings.replicates);
    if (largest * scale * factor <= max_scaled)
      scale *= factor;
    else
      samples_full = true;
  }
  const bool samples_added = next.draws_scale != current.draws_scale || next.replicates_scale != current.replicates_scale;
  step.more = (budgets_added || samples_added) && current.round < max_search_rounds;
  step.next = next;
  for (PrecisionVerdict& v : step.verdicts) {
    if (v.met) continue;
    if (list_full) v.why += "; the budget list is full (" + std::to_string(max_search_budgets) + " budgets)";
    if (samples_full) v.why += "; draws or replicates reached their limit";
    if (current.round >= max_search_rounds && (budgets_added || samples_added))
      v.why += "; stopped after " + std::to_string(max_search_rounds) + " rounds";
  }
  return step;
}

}  // namespace dobudget
