// Which pilot to run; see pilot_choice.hpp.
#include "core/answer/pilot_choice.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <map>

namespace dobudget {

namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr double kInf = std::numeric_limits<double>::infinity();

bool same_cell(const AnswerRow& a, const AnswerRow& b) {
  const bool same_assurance = (std::isnan(a.assurance) && std::isnan(b.assurance)) || a.assurance == b.assurance;
  return a.measure == b.measure && a.target == b.target && same_assurance && a.criterion == b.criterion &&
         a.strategy == b.strategy && a.logged == b.logged;
}

// A need for comparison: unknown (NaN) is worse than any known need, +infinity included.
double rank(double needed) { return std::isnan(needed) ? kInf : needed; }

double outer(const std::vector<double>& sorted, double prob, bool up) {
  const double h = (static_cast<double>(sorted.size()) - 1.0) * prob;
  const auto i = static_cast<std::size_t>(up ? std::ceil(h - 1e-9) : std::floor(h + 1e-9));
  return sorted[std::min(i, sorted.size() - 1)];
}

}  // namespace

std::vector<PilotChoiceRow> choose_pilot_policies(const Study& study, const std::vector<AnswerRow>& answers) {
  // Groups: scenarios with the same assignments apart from pilot.policy, in scenario order.
  std::map<std::vector<std::pair<std::string, std::string>>, std::vector<int>> groups;
  std::vector<std::vector<std::pair<std::string, std::string>>> order;
  for (const Scenario& sc : study.scenarios) {
    std::vector<std::pair<std::string, std::string>> rest;
    for (const auto& kv : sc.assignments)
      if (kv.first != "pilot.policy") rest.push_back(kv);
    auto [it, fresh] = groups.try_emplace(rest);
    if (fresh) order.push_back(rest);
    it->second.push_back(sc.index);
  }
  const auto policy_of = [&](int scenario) {
    return study.scenarios[static_cast<std::size_t>(scenario)].settings.pilot.policy;
  };

  std::vector<PilotChoiceRow> out;
  for (const auto& key : order) {
    const std::vector<int>& members = groups.at(key);
    const auto u = std::find_if(members.begin(), members.end(),
                                [&](int sc) { return policy_of(sc) == PilotPolicyKind::uniform; });
    if (u == members.end() || members.size() < 2) continue;
    std::string others;
    for (const auto& [k, v] : key) others += (others.empty() ? "" : ", ") + k + "=" + v;
    for (const AnswerRow& ur : answers) {
      if (ur.scenario != *u) continue;
      PilotChoiceRow row;
      row.others = others;
      row.uniform_scenario = *u;
      row.measure = ur.measure;
      row.target = ur.target;
      row.assurance = ur.assurance;
      row.criterion = ur.criterion;
      row.strategy = ur.strategy;
      row.logged = ur.logged;
      row.interval = ur.interval;
      row.needed_uniform = ur.needed_pilot;
      const AnswerRow* best = &ur;
      for (int sc : members) {
        const AnswerRow* r = &ur;
        if (sc != *u) {
          const auto it = std::find_if(answers.begin(), answers.end(),
                                       [&](const AnswerRow& a) { return a.scenario == sc && same_cell(a, ur); });
          if (it == answers.end()) continue;
          r = &*it;
        }
        row.needed.emplace_back(policy_of(sc), r->needed_pilot);
        if (rank(r->needed_pilot) < rank(best->needed_pilot)) best = r;
      }
      row.best_scenario = best->scenario;
      row.best = policy_of(best->scenario);
      row.needed_best = best->needed_pilot;
      if (!std::isnan(ur.needed_pilot) && !std::isnan(best->needed_pilot) &&
          !(std::isinf(ur.needed_pilot) && std::isinf(best->needed_pilot)))
        row.saved_vs_uniform = ur.needed_pilot - best->needed_pilot;
      row.low = row.high = kNaN;
      // Paired resamples need the same pairs in both cells (same draws and replicates).
      const auto& a = ur.resampled_needs;
      const auto& b = best->resampled_needs;
      if (!a.empty() && a.size() == b.size() && ur.pairs == best->pairs && ur.draws == best->draws) {
        std::vector<double> d(a.size());
        for (std::size_t k = 0; k < a.size(); ++k)
          d[k] = (std::isinf(a[k]) && std::isinf(b[k])) ? 0.0 : a[k] - b[k];
        std::sort(d.begin(), d.end());
        const double alpha = (1.0 - row.interval) / 2.0;
        row.low = outer(d, alpha, false);
        row.high = outer(d, 1.0 - alpha, true);
      }
      out.push_back(std::move(row));
    }
  }
  return out;
}

}  // namespace dobudget
