// The model file (docs/model-file.md): one user-given environment, as YAML.
//
//   states: 2
//   actions: 2
//   observations: 2
//   initial: [0.5, 0.5]                 # p0(s), S numbers
//   transitions:                        # T[a](s, s'): A matrices, each S rows of S numbers
//     - - [0.9, 0.1]
//       - [0.2, 0.8]
//     - - [0.5, 0.5]
//       - [0.5, 0.5]
//   emissions:                          # E(s, o): S rows of O numbers
//     - [0.8, 0.2]
//     - [0.3, 0.7]
//   rewards: [0, 1]                     # r(o): O numbers
//   logging_policy:                     # optional pi_log(a | s): S rows of A numbers
//     - [0.9, 0.1]
//     - [0.1, 0.9]
//
// Every row of initial, transitions, emissions and logging_policy must be a probability vector:
// non-negative entries summing to 1 within 1e-9. Rewards must be finite, |r| <= max_abs_reward.
// states, actions and observations are at most max_model_size; they are checked before any
// matrix is read, so a file declaring huge sizes is refused without allocating. Horizon and discount are
// not part of a model file: they stay in the study (environment.horizon, environment.discount).
// When logging_policy is absent the Environment's logging_policy is left empty (0 x 0) and the
// core builds it from the study's `logging` settings.
#pragma once
#include <yaml-cpp/yaml.h>

#include <filesystem>
#include <string>

#include "core/world/pomdp.hpp"

namespace dobudget::io {

// The largest number of states, actions or observations (and latent values, fit.latent_states):
// 200. The forward-backward tables hold A x O x Z x Z entries and parts of their index arithmetic
// are in int: 200^4 = 1.6e9 < 2^31 - 1 cannot overflow. (Such a model is already far beyond what a
// study can fit in reasonable time: one E-step costs about observations x Z^2.)
inline constexpr int max_model_size = 200;

// The largest |reward|: 1e100. A return sums at most H <= 10^4 rewards (environment.horizon), the
// return_gap takes differences of returns (<= 2e104) and standard errors sum their squares over
// at most 10^7 rollouts (<= 4e215 x 1e7 = 4e222), all far below the double range (1.8e308), while
// a reward of 1e308 makes a plan's values infinite and its choices undefined.
inline constexpr double max_abs_reward = 1e100;

// Reads a model file and gives it the study's horizon and discount (which must be valid: horizon
// >= 1, discount in (0, 1]; std::invalid_argument otherwise). Throws InputError naming the file,
// the line and the key path of the first problem (e.g. "transitions[1]: has 3 rows, expected 4
// (states)", "emissions[2]: entries sum to 0.9, not 1 (within 1e-09)"), including unreadable
// files (line 0), malformed YAML and unknown keys (with the closest valid key as a suggestion).
Environment load_model(const std::filesystem::path& file, int horizon, double discount);

// The model file text of `env` (logging_policy written only when non-empty; horizon and discount
// not written). Numbers are written in the shortest form that reads back to the same double, so
// load_model(model_yaml(env)) reproduces every matrix bit for bit. Deterministic.
std::string model_yaml(const Environment& env);

// The same format, for readers and writers that embed a model in a larger YAML document (a study
// file's environment.model). `file` and `key_prefix` (e.g. "environment.model", or "" for a model
// file of its own) locate the messages; the node must be the model's mapping.
Environment parse_model(const YAML::Node& node, const std::string& file, const std::string& key_prefix, int horizon,
                        double discount);
void emit_model(YAML::Emitter& out, const Environment& env);  // emits the model's mapping

}  // namespace dobudget::io
