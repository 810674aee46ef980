// The study file (docs/study-file.md): reading it into a Study with every default filled in and the
// sweep expanded, and writing a resolved Study back as YAML.
//
// Keys and defaults (every key is optional, but a file must hold at least one: an empty file, or
// one of only comments, is refused):
//
//   name: example                # non-empty text, at most 200 bytes, UTF-8, no control characters
//   seed: 1                      # 0 .. 2^64-1
//   environment:                 # the synthetic family ...
//     states: 4                  #   >= 1 (also actions, observations, horizon, draws)
//     actions: 2
//     observations: 3
//     horizon: 8
//     discount: 1.0              #   in (0, 1]
//     draws: 4
//     dynamics_concentration: 0.5  # > 0
//     observation_noise: 0.3     #   in [0, 1]
//   # ... or a given model:  environment: { file: model.yaml, horizon: 8, discount: 1.0 }
//   #   file is resolved relative to the study file's directory; draws is 1 (giving another
//   #   value, or any synthetic-family key, is an error). Instead of `file`, `model:` may hold the
//   #   model itself (the model file format, see model_file.hpp); resolved_yaml writes it so.
//   logging: { privilege: 0.9, temperature: 0.2, q_discount: 0.9 }  # [0,1], > 0, [0,1)
//   pilot: { policy: uniform, explore: 0.2, floor: 0.2 }
//                                # policy: uniform, usual-practice, complement or targeted
//                                # (core/world/pilot_policy.hpp), or a list of them: the list is
//                                # a sweep axis over pilot.policy added after the sweep's keys
//                                # (paired scenarios; the answer then names the best policy).
//                                # explore (usual-practice) and floor (complement, targeted) in [0, 1]
//   budgets:                     # non-empty, strictly increasing whole numbers
//     logged: [0, 1000]          #   >= 0
//     pilot: [10, 30, 100, 300, 1000]  # >= 1
//   replicates: 10               # >= 1
//   strategies: [pilot-only, pooled, regime-aware]  # non-empty, no repeats
//   measures: [model_kl]         # model_kl and/or return_gap; non-empty, no repeats
//   fit: { latent_states: S, restarts: 3, max_restarts: 10, max_iterations: 200, tolerance: 1.0e-6,
//          prior: 0.1 }          # latent_states defaults to the environment's number of states;
//                                # sizes >= 1, tolerance > 0 (per observation), prior >= 0.
//                                # restarts: starts always run; max_restarts: starts at most while
//                                # the best optimum is not confirmed (below restarts: restarts)
//   evaluation: { trajectories: 1000, policy: uniform }  # >= 1; only uniform for now
//   planner: { belief_points: 500, seed: 0, exact_histories: 20000, rollouts: 2000 }
//                                # belief_points, rollouts >= 1; exact_histories >= 0
//   targets: { model_kl: 0.02 }  # measure -> target > 0, only for measured measures. When the
//                                # key is absent: model_kl 0.02 if model_kl is measured (return_gap
//                                # has no default target).
//   assurance: 0.8               # in (0, 1)
//   # Range mode (core/answer/precision_search.hpp): budgets.pilot as a range instead of a list,
//   #   budgets: { pilot: { from: 10, to: 3000 } }   # 1 <= from < to <= 10^7
//   # and the precision to reach (the defaults when the key is absent; it needs the range):
//   precision: { relative: 0.1, max_core_hours: 2 }  # relative in (0, 1), max_core_hours in (0, 1e6]
//   # budgets.pilot_rounds: [1, 2, ...] (whole numbers 1..20, one per listed pilot budget) is
//   # written by range-mode runs into each round's study: the round that added each budget.
//   sweep:                       # optional: dotted scalar key -> non-empty list of values
//     logging.privilege: [0.0, 0.5, 0.9]
//
// Sweep: the cartesian product of the lists, in the order the keys are written, the last key
// varying fastest; each combination is one Scenario (index 0, 1, ...) whose assignments are the
// (key, value) pairs in sweep order and whose label joins them as "key=value, key=value". Values
// are written in canonical form (numbers in their shortest round-trip form: 0.50 -> "0.5").
// A swept value replaces the value written in place, if any, and is validated exactly as if
// written there (the message names the sweep entry, e.g. "sweep.logging.privilege[2]"). Sweepable
// keys are the scenario's scalar settings: environment.{states, actions, observations, horizon,
// discount, draws, dynamics_concentration, observation_noise}, logging.*, pilot.policy,
// replicates, fit.*, evaluation.*, planner.*, targets.<measure>, assurance. Lists, sections,
// name, seed and environment.file/model cannot be swept. Without a sweep a study has exactly one
// scenario, with an empty label.
//
// Whole numbers may also be written as number literals with an integral value ("1e3").
// Upper limits (what the computation can hold; reasons in study_file.cpp): sizes and
// fit.latent_states 200, horizon 10^4, budgets 10^7 episodes and 100 per list, draws and
// replicates 10^5, units (scenarios x draws x replicates) 10^7, scenarios 10^4, fit.restarts 10^3,
// fit.max_iterations 10^5,
// fit.prior 1e100, evaluation.trajectories and planner.rollouts 10^7 (rollouts at least 2),
// planner.belief_points 10^4, planner.exact_histories 10^9; |reward| 1e100 (model_file.hpp).
// Every problem is an InputError (input_error.hpp) with the file, line and key path.
#pragma once
#include <filesystem>
#include <string>

#include "core/running/settings.hpp"
#include "io/input_error.hpp"

namespace dobudget::io {

// Reads, fills every default, validates and expands the sweep. Throws InputError.
Study load_study(const std::filesystem::path& file);

// The same from text; `file` names the study in messages and anchors a relative environment.file.
Study parse_study(const std::string& yaml_text, const std::filesystem::path& file);

// The resolved study as YAML: every default filled in, deterministic (same Study -> same bytes),
// and load_study/parse_study of it gives back the same Study. A given environment is written
// inline (environment.model, in the model file format), so the text is self-contained: it does
// not depend on the model file still being there, unchanged. A sweep is written as `sweep:` with
// the scenarios' canonical values; swept keys are left out of the settings written in place, and
// so is fit.latent_states when it follows a swept environment.states (a comment says so).
// Precondition: `study` is as load_study makes them (scenarios form the cartesian product of
// their assignments, in order, and differ only in swept settings); std::invalid_argument if the
// scenarios are not such a product.
std::string resolved_yaml(const Study& study);

}  // namespace dobudget::io
