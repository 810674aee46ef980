// The resolved settings of one scenario of a study (design.md sec. 7), as plain values.
// Reading them from YAML, defaults and validation live in src/io; the core only uses them.
#pragma once
#include <cstdint>
#include <map>
#include <optional>
#include <string>
#include <vector>

#include "core/measures/measure.hpp"
#include "core/world/pilot_policy.hpp"
#include "core/world/pomdp.hpp"
#include "core/fitting/strategy.hpp"

namespace dobudget {

struct SyntheticFamily {
  int states = 4;
  int actions = 2;
  int observations = 3;
  double dynamics_concentration = 0.5;
  double observation_noise = 0.3;
};

struct EnvironmentSettings {
  // Either a user-given model (then draws == 1) or the synthetic family.
  std::optional<Environment> given;  // logging_policy may be empty: then built from `logging`
  SyntheticFamily family;
  int horizon = 8;
  double discount = 1.0;
  int draws = 4;
};

struct LoggingSettings {
  double privilege = 0.9;
  double temperature = 0.2;
  double q_discount = 0.9;  // discount of the fully observed Q used by the logger
};

// The pilot regime's policy (core/world/pilot_policy.hpp, issue 13). `explore` is the uniform
// share of usual-practice; `floor` the share phi of complement and targeted spread uniformly
// (every action keeps at least floor / A). The policies read the unit's logged episodes at the
// largest logged budget (the records the team holds).
struct PilotSettings {
  PilotPolicyKind policy = PilotPolicyKind::uniform;
  double explore = 0.2;
  double floor = 0.2;
};

struct FitSettings {
  int latent_states = 4;
  int restarts = 3;          // random starts always run, each to convergence (see fit.hpp)
  int max_restarts = 10;     // cap on random starts while the best optimum is not confirmed
  int max_iterations = 200;  // cap on E-steps of one start
  double tolerance = 1e-6;
  double prior = 0.1;
};

struct EvaluationSettings {
  int trajectories = 1000;
};

struct PlannerSettings {
  int belief_points = 500;
  std::uint64_t seed = 0;       // extra key folded into the planner stream
  int exact_histories = 20000;  // enumerate exactly when the plan reaches at most this many histories
  int rollouts = 2000;          // otherwise, rollouts per evaluated plan
};

struct ScenarioSettings {
  EnvironmentSettings environment;
  LoggingSettings logging;
  PilotSettings pilot;
  std::vector<int> logged_budgets{0, 1000};
  std::vector<int> pilot_budgets{10, 30, 100, 300, 1000};
  int replicates = 10;
  std::vector<Strategy> strategies{all_strategies.begin(), all_strategies.end()};
  std::vector<Measure> measures{Measure::model_kl};
  FitSettings fit;
  EvaluationSettings evaluation;
  PlannerSettings planner;
  std::map<Measure, double> targets{{Measure::model_kl, 0.02}};
  double assurance = 0.8;
};

struct Scenario {
  int index = 0;
  std::string label;                                             // e.g. "logging.privilege=0.5"
  std::vector<std::pair<std::string, std::string>> assignments;  // swept key -> value, in sweep order
  ScenarioSettings settings;
};

struct Study {
  std::string name = "example";
  std::uint64_t seed = 1;
  std::vector<Scenario> scenarios;  // at least one; a study without sweep has exactly one
};

}  // namespace dobudget
