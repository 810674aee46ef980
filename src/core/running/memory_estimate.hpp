// Peak memory of `dobudget plan`, estimated from the settings before anything is allocated, so
// that `check` can print it and `check` and `plan` can refuse a study the machine cannot hold
// instead of failing after allocating gigabytes. The core gives parts and the settings they grow
// with (ids and numbers); naming them for the user (study keys, messages) and the memory this
// process may use are src/io's (memory_messages.hpp, machine_memory.hpp).
//
// One unit holds at its peak (bytes; P, L the largest pilot and logged budgets, H the horizon,
// S, A, O the environment's sizes, Z = fit.latent_states, T = evaluation.trajectories,
// N = planner.belief_points, R = planner.rollouts, F = fits_per_unit):
//   datasets         (P + L) (2H + 1) x 4                       int32 observations and actions
//   evaluation       T (2H + 1) x 4 + 3 T (H + 1) O x 8          histories, true predictives and their
//                                                                logs, one fitted model's predictives
//   fit              15 n x 8 + 8 x 8 x [(H + 1)(3Z + 3)             n = Z + A Z^2 + Z O + Z A parameters:
//                    + H (Z + 1) + Z + A Z^2 + O Z + A Z + Z + 1]  SQUAREM's 3 counts, 6 packed vectors and
//                    + 8 x 8 (Z^2 + 2Z)                          about 5 parameter copies (15 rounds up
//                                                                14); forward-backward's workspace for a
//                                                                batch of 8 episodes and its selection
//                                                                tables (memory_estimate.cpp)
//   fits kept        F n x 8                                     every fitted model of the unit
//   planner          plan_bytes(Z) + 3 R x 8                     the fitted model's plan; the true and
//                                                                fitted plans' rollout returns
//   draw context     plan_bytes(S)                               the true plan (shared by a draw's units)
// with plan_bytes(K) = 3 H N K x 8 (belief points of every stage, up to twice their size while a
//                    vector grows, and alpha vectors, at most one per point)
//                    + (N (3K + O + A + N) + K N) x 8 + N A O x 4 (one backup's workspace).
// The planner parts count only when return_gap is measured, the evaluation part only for model_kl.
// The study's peak is min(threads, units) x the costliest scenario's unit, plus the rows every
// finished unit keeps until the tables are written (units x F' rows x bytes_per_row, F' the rows of
// a unit: strategies x logged budgets x pilot budgets; held in the journal and in the result).
// Terms below a few kilobytes (environment, belief filters) are counted only where they scale.
// Every count is a double (no overflow), and nothing is enumerated: the estimate of a study that
// is refused allocates nothing sized by it.
#pragma once
#include <vector>

#include "core/running/settings.hpp"

namespace dobudget {

// The parts of the table above.
enum class MemoryPartId {
  datasets,
  evaluation_histories,
  model_fit,
  fitted_models_kept,
  planner_fitted,
  planner_true,
  results,  // rows kept until the tables are written
};

// A setting a part grows with (its value is given with it).
enum class Driver {
  pilot_budget,         // the largest pilot budget, P
  logged_budget,        // the largest logged budget, L
  horizon,              // H
  states,               // S
  actions,              // A
  observations,         // O
  latent_states,        // Z
  trajectories,         // T
  belief_points,        // N
  rollouts,             // R
  pilot_budget_count,   // how many pilot budgets are listed
  logged_budget_count,  // how many logged budgets are listed
  strategy_count,       // how many strategies are listed
  scenarios,            // how many scenarios the sweep makes
  draws,                // environment draws (the largest of any scenario)
  replicates,           // replicates (the largest of any scenario)
};

struct DriverValue {
  Driver driver;
  double value = 0.0;
};

struct MemoryPart {
  MemoryPartId id = MemoryPartId::datasets;
  double bytes = 0.0;
  std::vector<DriverValue> drivers;  // the settings of the formula above, in its order
};

struct MemoryEstimate {
  int concurrent_units = 1;     // min(threads, units)
  int scenario = 0;             // the scenario whose unit is costliest
  double unit_bytes = 0.0;      // one unit of that scenario (sum of `unit_parts`)
  std::vector<MemoryPart> unit_parts;
  MemoryPart results;           // rows kept for the tables
  double peak_bytes = 0.0;      // concurrent_units x unit_bytes + results.bytes
  // The part contributing most to peak_bytes (unit parts counted concurrent_units times).
  MemoryPart largest() const;
};

// Bytes one kept row costs (RunRecord in the journal's map and in the result, with overheads).
double bytes_per_row();

// Bytes of one unit of `s`, by part (in the order of the table above).
std::vector<MemoryPart> unit_memory(const ScenarioSettings& s);

MemoryEstimate estimate_memory(const Study& study, int threads);

}  // namespace dobudget
