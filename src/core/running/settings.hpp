// The resolved settings of one scenario of a study (docs/study-file.md), as plain values.
// Reading them from YAML, defaults and validation live in src/io; the core only uses them.
#pragma once
#include <cstdint>
#include <map>
#include <memory>
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

struct RecordsPosterior;  // core/world/posterior_world.hpp

// Plausible worlds from the team's records (issue 9): environment: { data: ..., codebook: ... }.
// The io layer reads the records and fits them (io/records_study.hpp); each environment draw is
// then a world drawn from `posterior` (posterior_world.hpp) with its own decision rule as logger.
struct RecordsSettings {
  std::string data, codebook;  // the files as resolved by the reader (codebook may be empty)
  std::string digest;          // of the bytes of both files: a changed record makes another study
  int logged_episodes = 0, pilot_episodes = 0;  // in the records (pilot ones count as already run)
  int longest_episode = 0;                      // actions of the longest episode
  int latent_states = 0;                        // 0: auto (model_selection.hpp)
  int chosen_latent_states = 0;                 // the fit's size, once known (0: not fitted yet)
  bool fit_follows = false;  // fit.latent_states was not written: it becomes the records' latent size
  bool rewards = false;      // the codebook gives rewards (return_gap needs them)
  double concentration = 1.0;                   // prior_concentration (posterior_world.hpp)
  std::shared_ptr<const RecordsPosterior> posterior;  // the fit; null until the records are fitted
};

struct EnvironmentSettings {
  // Either a user-given model (then draws == 1), the team's records, or the synthetic family.
  std::optional<Environment> given;  // logging_policy may be empty: then built from `logging`
  std::optional<RecordsSettings> records;  // family holds its sizes (states: the latent size, or the largest auto tries)
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

// Range mode (issue 10): budgets.pilot given as { from, to } instead of a list; `plan` chooses the
// budgets itself, in rounds (core/answer/precision_search.hpp).
struct PilotRange {
  int from = 10;
  int to = 3000;
};

// The stated precision of a range-mode study: every needed budget's interval within +-relative
// of it (half-width over value), or the rounds stop at max_core_hours (estimated from counts).
struct PrecisionSettings {
  double relative = 0.1;
  double max_core_hours = 2.0;
};

struct ScenarioSettings {
  EnvironmentSettings environment;
  LoggingSettings logging;
  PilotSettings pilot;
  std::vector<int> logged_budgets{0, 1000};
  std::vector<int> pilot_budgets{10, 30, 100, 300, 1000};
  // Range mode: the range; pilot_budgets then holds the first round's coarse grid.
  std::optional<PilotRange> pilot_range;
  // The round in which each pilot budget was added (parallel to pilot_budgets; empty: all in one).
  // A fit's warm start from a smaller pilot budget only comes from the same round (unit.cpp), so
  // budgets added in a later round never change the rows of earlier ones.
  std::vector<int> pilot_rounds;
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
  std::optional<PrecisionSettings> precision;  // range mode (every scenario has pilot_range)
};

}  // namespace dobudget
