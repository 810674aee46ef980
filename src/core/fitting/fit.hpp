// Maximum a posteriori fit of the latent model by expectation-maximisation (Baum-Welch with
// actions as inputs; Dempster, Laird and Rubin, JRSS B 39(1), 1977), with several starts
// (docs/design.md, "Fitting"). The objective is log p(data | q) + prior * sum log q (the log posterior
// under a symmetric Dirichlet(prior + 1) on every row, up to a constant); EM never decreases it.
// EM is accelerated by SQUAREM (see fit.cpp).
//
// Starts, in this order: the warm starts given (other fits of the same data: fit_start.hpp), then
// random starts that spread the latent values (fit_start.hpp). Each runs to convergence: a SQUAREM
// cycle that improves the objective by at most `tolerance` per observation of the data and moves
// no probability by more than 1e-3 (neither loosens as the data grow). A start that ends with two
// latent values collapsed onto one another is split and continued (collapse.hpp).
// Confirmation: starting stops once at least `restarts` starts (warm starts count; at least one is
// random) have run and the best objective has been reached by a second start, within 1e-4 nats per
// observation; otherwise random starts continue up to `max_restarts` starts in all. The start
// with the highest objective (log posterior, not log-likelihood) is kept; `confirmed` says whether
// a second start reached it. (Screening many starts by a few EM steps, "small EM", failed more
// often than full restarts on this model class: DEVELOPERS.md, bench_restarts.)
#pragma once
#include <vector>

#include "core/world/dataset.hpp"
#include "core/fitting/fit_start.hpp"
#include "core/world/pomdp.hpp"
#include "core/world/seeding.hpp"
#include "core/running/settings.hpp"
#include "core/running/stop.hpp"

namespace dobudget {

struct FitResult {
  Pomdp model;             // the interventional model q0, qT, qE (rewards, horizon, discount copied from the shape)
  Matrix decision;         // qA (Z x A) for a regime-aware fit, empty otherwise
  double loglik = 0.0;     // training log-likelihood of the kept start
  double objective = 0.0;  // loglik + log prior: the highest of every start's
  int iterations = 0;      // E-steps (EM map evaluations) of the kept start, its escapes included
  bool converged = false;  // the kept start met the stopping rule (not the iteration cap)
  int best_restart = 0;                    // index of the winning start (warm starts first)
  std::vector<double> restart_objectives;  // final objective of every start, in the order run
  int starts = 0;                          // starts run: warm starts + random starts
  bool confirmed = false;                  // a second start ended within the confirmation tolerance of the best
  int escapes = 0;                         // splits of collapsed latent values tried (collapse.hpp)
  long long total_iterations = 0;          // E-steps of every start together
};

// Fits Z = settings.latent_states latent values to `data` (episodes of the pilot regime, and of
// the logged regime: with `decision_rule` their actions are explained by a latent decision rule
// qA(z, a); without it they are taken as interventions, like pilot episodes).
// `shape` supplies actions, observations, rewards, horizon and discount. Random starts and splits
// draw from `rng` only, in a fixed order: the result depends on the data, the settings, `warm`
// and the stream. `stop` is polled before every E-step (stop.hpp): a requested stop throws
// Cancelled.
FitResult fit(const std::vector<DataView>& data, bool decision_rule, const FitSettings& settings, const Pomdp& shape,
              Engine& rng, const std::vector<WarmStart>& warm = {}, const StopToken& stop = {});

// One EM step from `model` (and `decision` when not empty); returns the log-likelihood of the
// data under the parameters before the step. Exposed for reference tests.
double em_step(const std::vector<DataView>& data, double prior, Pomdp& model, Matrix& decision);

// Log-likelihood of the data (logged views multiply `decision` when it is not empty).
double log_likelihood(const std::vector<DataView>& data, const Pomdp& model, const Matrix& decision);

}  // namespace dobudget
