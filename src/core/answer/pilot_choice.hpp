// Which pilot to run (issue 13): among scenarios that differ only in pilot.policy (paired: same
// worlds, logged data and evaluation histories; seeding.hpp), for each query (measure, target,
// assurance, criterion), strategy and logged budget, the policy whose answer needs the fewest
// pilot episodes, and its saving against the uniform pilot:
//   saved_vs_uniform = needed(uniform) - needed(best),
// with a paired percentile bootstrap interval (Efron and Tibshirani, "An Introduction to the
// Bootstrap", 1993, ch. 13): the answer's resamples are the same (draw, replicate) pairs in every
// scenario of a study (answer.hpp), so resample k gives d_k = need_k(uniform) - need_k(best) on
// the same pairs for both policies. Unreachable or not-reached resamples count as +infinity;
// inf - inf (neither reaches the target in that resample) counts as 0 saved. low and high are
// the order statistics at Hyndman and Fan definition 7's positions (n - 1) alpha and
// (n - 1)(1 - alpha), rounded outwards, alpha = (1 - interval) / 2 (so infinities need no
// interpolation). This is the sampling part of the spread only: unlike the answer's interval it
// does not add where each crossing lies between the simulated budgets. The best policy is chosen
// on the point estimates, so the interval of its saving is optimistic when policies are close.
// Ties go to uniform, then to the policy listed first. A pure computation on answer rows.
#pragma once
#include <optional>
#include <string>
#include <vector>

#include "core/answer/answer.hpp"
#include "core/running/settings.hpp"

namespace dobudget {

struct PilotChoiceRow {
  std::string others;  // the scenarios' other swept assignments ("" without other sweep keys): user text
  int uniform_scenario = 0, best_scenario = 0;
  Measure measure = Measure::model_kl;
  double target = 0.0, assurance = 0.0;
  Criterion criterion = Criterion::assurance;
  Strategy strategy = Strategy::pilot_only;
  int logged = 0;
  PilotPolicyKind best = PilotPolicyKind::uniform;
  double needed_best = 0.0, needed_uniform = 0.0;
  std::optional<double> saved_vs_uniform;  // empty when either need is unknown or both infinite
  double low = 0.0, high = 0.0;            // paired interval; NaN without resamples or unpaired cells
  double interval = 0.90;
  std::vector<std::pair<PilotPolicyKind, double>> needed;  // every policy's need, in scenario order
};

// Rows for every group of scenarios that holds a uniform scenario and at least one other policy;
// empty when the study compares no policies. Order: group (first scenario), then `answers` order.
std::vector<PilotChoiceRow> choose_pilot_policies(const Study& study, const std::vector<AnswerRow>& answers);

}  // namespace dobudget
