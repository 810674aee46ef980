// The methods paragraph of a report; see methods_text.hpp.
#include "io/methods_text.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>
#include <map>
#include <set>

#include "io/answer_table.hpp"
#include "io/text_escape.hpp"

namespace dobudget::io {

namespace {

std::string number(double x) { return fmt::format("{}", x); }

std::string percent(double x) { return fmt::format("{:g}%", std::round(x * 1000.0) / 10.0); }

std::string join(const std::vector<std::string>& items, const std::string& sep, const std::string& last_sep) {
  std::string s;
  for (std::size_t i = 0; i < items.size(); ++i) {
    if (i > 0) s += i + 1 == items.size() ? last_sep : sep;
    s += items[i];
  }
  return s;
}

std::string list(const std::vector<int>& v) {
  std::vector<std::string> t;
  for (int x : v) t.push_back(std::to_string(x));
  return join(t, ", ", ", ");
}

// The swept keys of the study and their values in scenario order (user text, as written).
using Sweep = std::map<std::string, std::vector<std::string>>;

Sweep sweep_of(const Study& study) {
  Sweep sweep;
  for (const auto& sc : study.scenarios)
    for (const auto& [key, value] : sc.assignments) {
      auto& values = sweep[key];
      if (std::find(values.begin(), values.end(), value) == values.end()) values.push_back(value);
    }
  return sweep;
}

// `text` (scenario 0's value of `key`), or "swept over a, b, c" when the study sweeps `key`.
std::string value_of(const Sweep& sweep, const std::string& key, const std::string& text) {
  const auto it = sweep.find(key);
  if (it == sweep.end()) return text;
  return "swept over " + join(it->second, ", ", ", ");
}

std::string strategy_phrase(Strategy s) {
  switch (s) {
    case Strategy::pilot_only: return "on the pilot episodes only (pilot-only)";
    case Strategy::pooled: return "on the logged and pilot episodes pooled as if they were alike (pooled)";
    case Strategy::regime_aware:
      return "on both, with a regime-aware model that reads the logged actions as evidence about the hidden state "
             "(regime-aware)";
  }
  return "?";
}

std::string measure_phrase(Measure m) {
  switch (m) {
    case Measure::model_kl:
      return "the model error model_kl (the Kullback-Leibler divergence, in nats per observation, from the true to "
             "the fitted interventional predictive distribution of the next observation)";
    case Measure::return_gap:
      return "the return gap return_gap (the share of the achievable improvement over uniformly random actions that "
             "is lost by planning with the fitted model instead of the true one)";
  }
  return "?";
}

// "38 pilot episodes (90% interval [28, 80])", with the status where the number needs it.
std::string answer_phrase(const AnswerRow& r) {
  std::string s = needed_text(r) + " pilot episodes";
  if (r.status == AnswerStatus::unreachable) {
    s = "cannot be met with pilot episodes of this kind";
    if (r.floor) s += fmt::format(" (its fitted learning curve levels off at {:.3g})", *r.floor);
    return s;
  }
  if (r.status == AnswerStatus::not_reached) s = "more pilot episodes than the largest budget simulated";
  std::vector<std::string> notes;
  if (!std::isnan(r.low) || !std::isnan(r.high)) notes.push_back(fmt::format("{} interval {}", percent(r.interval), interval_text(r)));
  if (r.status == AnswerStatus::extrapolated) notes.push_back("extrapolated beyond the largest simulated budget");
  if (r.status == AnswerStatus::met_at_smallest && r.needed_pilot > 0.0) notes.push_back("met already at the smallest simulated budget");
  if (!notes.empty()) s += " (" + join(notes, "; ", "; ") + ")";
  return s;
}

// The answers of one scenario and query, one per strategy at its largest logged budget.
std::string result_sentence(const std::vector<AnswerRow>& rows, const ScenarioSettings& s) {
  std::vector<std::string> parts;
  std::string pilot_only;
  int logged = -1;
  for (Strategy st : s.strategies) {
    const AnswerRow* best = nullptr;
    for (const auto& r : rows)
      if (r.strategy == st && (best == nullptr || r.logged > best->logged)) best = &r;
    if (best == nullptr) continue;
    if (st == Strategy::pilot_only) {
      pilot_only = "pilot-only, which ignores the logged episodes, needs " + answer_phrase(*best);
    } else {
      logged = std::max(logged, best->logged);
      parts.push_back(fmt::format("{} needs {}", name(st), answer_phrase(*best)));
    }
  }
  std::string sentence;
  if (!parts.empty()) sentence = fmt::format("with {} logged episodes, {}", logged, join(parts, "; ", "; and "));
  if (!pilot_only.empty()) sentence += sentence.empty() ? pilot_only : "; " + pilot_only;
  return sentence;
}

std::string query_heading(const AnswerRow& r) {
  if (r.criterion == Criterion::mean) return fmt::format("For a mean {} of at most {}", name(r.measure), number(r.target));
  return fmt::format("For {} at most {} with assurance {}", name(r.measure), number(r.target), percent(r.assurance));
}

// Queries (measure, target, assurance, criterion) in order of first appearance.
std::vector<AnswerRow> queries_of(const std::vector<AnswerRow>& rows) {
  std::vector<AnswerRow> q;
  for (const auto& r : rows)
    if (std::none_of(q.begin(), q.end(), [&](const AnswerRow& x) {
          return x.measure == r.measure && x.target == r.target && x.criterion == r.criterion;
        }))
      q.push_back(r);
  return q;
}

// The pilot policy in words (core/world/pilot_policy.hpp); a sweep or list over pilot.policy names them all.
std::string pilot_sentence(const PilotSettings& pilot, const Sweep& sweep) {
  for (const auto& [key, values] : sweep)
    if (key == "pilot.policy")
      return fmt::format(" Pilot episodes were simulated under each of the pilot policies {} on the same worlds, logged "
                         "data and evaluation histories; every policy chooses actions from the recorded history only, "
                         "never from the hidden state (unconfounded).",
                         join(values, ", ", " and "));
  switch (pilot.policy) {
    case PilotPolicyKind::uniform: break;
    case PilotPolicyKind::usual_practice:
      return fmt::format(" Pilot episodes followed usual practice: with probability {} a uniformly random action, "
                         "otherwise an action drawn from the loggers' action frequencies after the same recorded "
                         "observation (from the recorded history only, so unconfounded).",
                         number(pilot.explore));
    case PilotPolicyKind::complement:
      return fmt::format(" Pilot episodes favoured the actions the logged episodes show least often after the same "
                         "recorded observation, each action keeping at least {} / A probability (from the recorded "
                         "history only, so unconfounded).",
                         number(pilot.floor));
    case PilotPolicyKind::targeted:
      return fmt::format(" Pilot episodes were targeted: after a regime-aware fit to the logged episodes, each step "
                         "took the action whose next transition is least known under the current belief, and a "
                         "uniformly random action with probability {} (from the recorded history only, so "
                         "unconfounded).",
                         number(pilot.floor));
  }
  return " Pilot episodes chose actions uniformly at random, independently of the hidden state (unconfounded).";
}

}  // namespace

const char* methods_caution() {
  return "These numbers are a design input obtained by simulation under the assumptions stated above; they are no "
         "substitute for a qualified statistician, for ethics review, or for the regulations that govern trials "
         "where the trial runs.";

}

std::vector<std::string> methods_paragraphs(const MethodsInput& in) {
  const Study& study = *in.study;
  const std::vector<AnswerRow>& answers = *in.answers;
  const ScenarioSettings& s = study.scenarios.front().settings;
  const Sweep sweep = sweep_of(study);
  const auto& e = s.environment;
  std::vector<std::string> out;

  // 1. What was simulated.
  std::string p = "Methods. ";
  const int pairs = e.draws * s.replicates;
  if (!sweep.empty()) {
    std::vector<std::string> swept;
    for (const auto& [key, values] : sweep) swept.push_back(key + " over " + join(values, ", ", ", "));
    p += fmt::format(
        "The study {} swept {}: {} scenarios, paired (they share their worlds, pilot data and evaluation histories "
        "wherever the swept setting does not change them), with the other settings common to all. ",
        study.name, join(swept, "; ", "; and "), study.scenarios.size());
  }
  const std::string horizon = value_of(sweep, "environment.horizon", std::to_string(e.horizon));
  if (e.given) {
    const auto& m = e.given->model;
    p += fmt::format(
        "{} simulated the model given in the study file ({} hidden states, {} actions, {} observations, horizon {} "
        "steps per episode): one world, with {} replicates of the data.",
        sweep.empty() ? fmt::format("The study {}", study.name) : std::string("It"), m.states, m.actions,
        m.observations, horizon, value_of(sweep, "replicates", std::to_string(s.replicates)));
  } else if (e.records) {
    const RecordsSettings& r = *e.records;
    p += fmt::format(
        "{} planned from the team's own records ({} logged and {} pilot episodes, the longest of {} steps): a "
        "regime-aware latent model with {} latent values was fitted to them, and {} plausible worlds were drawn from "
        "its approximate posterior (each probability row from a Dirichlet distribution with the expected counts of "
        "the records plus a prior concentration of {}, so that the worlds agree where the records are rich and "
        "differ where they are silent), each with its own fitted decision rule as the logger; horizon {} steps, {} "
        "replicates of the data in each world: {} (world, replicate) pairs.",
        sweep.empty() ? fmt::format("The study {}", study.name) : std::string("It"), r.logged_episodes,
        r.pilot_episodes, r.longest_episode, e.family.states,
        value_of(sweep, "environment.draws", std::to_string(e.draws)),
        value_of(sweep, "environment.prior_concentration", number(r.concentration)), horizon,
        value_of(sweep, "replicates", std::to_string(s.replicates)), pairs);
  } else {
    p += fmt::format(
        "{} simulated {} worlds (environment draws) from a synthetic family of finite partially observable "
        "Markov decision processes with {} hidden states, {} actions and {} observations, horizon {} steps per "
        "episode (transition rows Dirichlet with concentration {}; observation noise {}), and {} replicates of the "
        "data in each world: {} (world, replicate) pairs.",
        sweep.empty() ? fmt::format("The study {}", study.name) : std::string("It"),
        value_of(sweep, "environment.draws", std::to_string(e.draws)),
        value_of(sweep, "environment.states", std::to_string(e.family.states)),
        value_of(sweep, "environment.actions", std::to_string(e.family.actions)),
        value_of(sweep, "environment.observations", std::to_string(e.family.observations)), horizon,
        value_of(sweep, "environment.dynamics_concentration", number(e.family.dynamics_concentration)),
        value_of(sweep, "environment.observation_noise", number(e.family.observation_noise)),
        value_of(sweep, "replicates", std::to_string(s.replicates)), pairs);
  }
  const bool given_logger = e.given && e.given->logging_policy.size() > 0;
  if (e.records) {
    // The worlds' loggers are the fitted decision rules (above).
  } else if (given_logger) {
    p += " Logged episodes followed the logging policy given with the model (the loggers' choices depend on the "
         "hidden state).";
  } else {
    p += fmt::format(
        " Logged episodes came from decision-makers who see the hidden state and choose action a in state s with "
        "probability privilege x softmax(Q(s, .) / temperature)(a) + (1 - privilege) / A, where Q holds the action "
        "values of the fully observed problem (discount {}), with privilege {} and temperature {}.",
        value_of(sweep, "logging.q_discount", number(s.logging.q_discount)),
        value_of(sweep, "logging.privilege", number(s.logging.privilege)),
        value_of(sweep, "logging.temperature", number(s.logging.temperature)));
  }
  p += pilot_sentence(s.pilot, sweep);
  p += fmt::format(" Logged budgets: {} episodes; pilot budgets: {} episodes (smaller budgets are the first episodes of larger ones).",
                   value_of(sweep, "budgets.logged", list(s.logged_budgets)),
                   value_of(sweep, "budgets.pilot", list(s.pilot_budgets)));
  out.push_back(p);

  // 2. Fitting.
  {
    std::vector<std::string> ways;
    for (Strategy st : s.strategies) ways.push_back(strategy_phrase(st));
    out.push_back(fmt::format(
        "Fitting. For each pair and budget, an input-output hidden Markov model with {} latent states was fitted by "
        "expectation-maximisation (Baum-Welch, accelerated by SQUAREM) with a symmetric Dirichlet pseudo-count of {} "
        "on every probability (a maximum a posteriori estimate), from {} to {} starts of at most {} iterations each, "
        "keeping the start of highest posterior objective; it was fitted {}.",
        value_of(sweep, "fit.latent_states", std::to_string(s.fit.latent_states)),
        value_of(sweep, "fit.prior", number(s.fit.prior)),
        value_of(sweep, "fit.restarts", std::to_string(s.fit.restarts)),
        value_of(sweep, "fit.max_restarts", std::to_string(std::max(s.fit.restarts, s.fit.max_restarts))),
        value_of(sweep, "fit.max_iterations", std::to_string(s.fit.max_iterations)), join(ways, ", ", ", and ")));
  }

  // 3. The criterion.
  const auto queries = queries_of(answers);
  {
    std::string c = "Criterion. ";
    if (queries.empty()) c += "The study sets no target, so no pilot budget is computed. ";
    for (const auto& q : queries) {
      if (q.criterion == Criterion::mean)
        c += fmt::format("The target is a mean of {} of at most {} over the pairs. ", measure_phrase(q.measure),
                         number(q.target));
      else
        c += fmt::format("The target is {} of at most {} in at least {} of the pairs. ", measure_phrase(q.measure),
                         number(q.target), percent(q.assurance));
    }
    if (!queries.empty())
      c += fmt::format(
          "The needed pilot budget is the smallest at which the share of pairs meeting the target (made "
          "non-decreasing in the budget by isotonic regression) reaches the assurance, interpolated in log(budget) "
          "between the simulated budgets (beyond the largest, from a fitted learning curve c + a n^-b). Intervals are "
          "{} two-stage percentile bootstrap intervals ({} resamples: worlds with replacement, then replicates "
          "within each world), widened to the simulated budgets around each crossing.",
          percent(queries.front().interval), in.bootstrap);
    out.push_back(c);
  }

  // 4. The answers.
  if (!queries.empty()) {
    std::string r = "Results. ";
    for (const auto& q : queries) {
      std::string part = query_heading(q) + ": ";
      std::vector<std::string> per_scenario;
      for (const auto& sc : study.scenarios) {
        std::vector<AnswerRow> rows;
        for (const auto& a : answers)
          if (a.scenario == sc.index && a.measure == q.measure && a.target == q.target && a.criterion == q.criterion)
            rows.push_back(a);
        const std::string sentence = result_sentence(rows, sc.settings);
        if (sentence.empty()) continue;
        per_scenario.push_back(sweep.empty() ? sentence
                                             : fmt::format("in scenario {} ({}), {}", sc.index, sc.label, sentence));
      }
      part += per_scenario.empty() ? std::string("no answer (no run record has a value)") : join(per_scenario, ". In ", ". In ");
      if (sweep.empty() || study.scenarios.size() < 2) {
        r += part + ". ";
        continue;
      }
      // The worst case over the scenarios, at each strategy's largest logged budget.
      std::vector<AnswerRow> of_query;
      for (const auto& a : answers)
        if (a.measure == q.measure && a.target == q.target && a.criterion == q.criterion) of_query.push_back(a);
      std::vector<std::string> worst;
      for (const auto& w : worst_case_over_scenarios(of_query)) {
        bool largest = true;
        for (const auto& a : of_query)
          if (a.strategy == w.strategy && a.logged > w.logged) largest = false;
        if (!largest) continue;
        worst.push_back(fmt::format("{} {} (scenario {})", name(w.strategy), answer_phrase(w), w.scenario));
      }
      r += part + ". Worst case over the scenarios, the budget to plan for when the swept setting is unknown: " +
           join(worst, "; ", "; ") + ". ";
    }
    if (r.back() == ' ') r.pop_back();
    out.push_back(r);
  }

  // 5. Assumptions.
  {
    std::string a = "Assumptions. ";
    a += e.given     ? "The real problem behaves like the given model; "
         : e.records ? "The real problem behaves like one of the plausible worlds of the records' fit (a latent model "
                       "of the chosen size; where the records are silent, the prior concentration decides how widely "
                       "the worlds differ); "
                     : "The real problem behaves like a member of the synthetic family at these sizes; ";
    a += e.records ? "the loggers decided as the fitted decision rule says; "
         : given_logger ? "the loggers decided as the given logging policy says; "
                      : "the loggers decided as the logging model above says (how much of the hidden state they saw is "
                        "the privilege); ";
    a += "pilot actions depend only on the recorded history (never on the hidden state); episodes are independent "
         "and of the fixed horizon; the "
         "fitted model class (an input-output hidden Markov model with the stated latent states) is the one the "
         "analysis will use; and the targets are met on simulated data, where the truth is known.";
    if (!e.given && e.draws < few_draws)
      a += fmt::format(" With {} worlds (fewer than {}), the intervals understate the spread between worlds.", e.draws,
                       few_draws);
    out.push_back(a);
  }

  out.push_back(methods_caution());
  return out;
}

std::string methods_plain_text(const std::vector<std::string>& paragraphs) {
  std::string s;
  for (std::size_t i = 0; i < paragraphs.size(); ++i) {
    if (i > 0) s += "\n";
    s += printable_line(paragraphs[i]) + "\n";
  }
  return s;
}

}  // namespace dobudget::io
