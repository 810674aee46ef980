// Maximum a posteriori fit of the latent model by expectation-maximisation (Baum-Welch with
// actions as inputs; Dempster, Laird and Rubin, JRSS B 39(1), 1977), with restarts
// (design.md sec. 3). The objective is log p(data | q) + prior * sum log q (the log posterior
// under a symmetric Dirichlet(prior + 1) on every row, up to a constant); EM never decreases it.
// EM is accelerated by SQUAREM (see fit.cpp). `restarts` random starts each run to convergence and
// the highest objective is kept. (Screening many starts by a few EM steps, "small EM", failed more
// often than full restarts on this model class: DEVELOPERS.md, bench_restarts.)
#pragma once
#include <vector>

#include "core/dataset.hpp"
#include "core/pomdp.hpp"
#include "core/seeding.hpp"
#include "core/settings.hpp"
#include "core/stop.hpp"

namespace dobudget {

struct FitResult {
  Pomdp model;             // the interventional model q0, qT, qE (rewards, horizon, discount copied from the shape)
  Matrix decision;         // qA (Z x A) for a regime-aware fit, empty otherwise
  double loglik = 0.0;     // training log-likelihood of the kept restart
  double objective = 0.0;  // loglik + log prior
  int iterations = 0;      // E-steps (EM map evaluations) of the kept restart
  bool converged = false;  // relative objective change fell below the tolerance
  int best_restart = 0;                    // index of the winning random start
  std::vector<double> restart_objectives;  // final objective of every start
};

// Fits Z = settings.latent_states latent values to `data` (episodes of the pilot regime, and of
// the logged regime: with `decision_rule` their actions are explained by a latent decision rule
// qA(z, a); without it they are taken as interventions, like pilot episodes).
// `shape` supplies actions, observations, rewards, horizon and discount.
// Initialisation of each restart (drawn from `rng`): q0, qT[a] rows and qA rows ~ Dirichlet(1);
// qE rows = 1/2 (empirical observation frequencies) + 1/2 Dirichlet(1), which starts every latent
// value near the data yet breaks the symmetry between them.
// `stop` is polled before every E-step (stop.hpp): a requested stop throws Cancelled.
FitResult fit(const std::vector<DataView>& data, bool decision_rule, const FitSettings& settings, const Pomdp& shape,
              Engine& rng, const StopToken& stop = {});

// One EM step from `model` (and `decision` when not empty); returns the log-likelihood of the
// data under the parameters before the step. Exposed for reference tests.
double em_step(const std::vector<DataView>& data, double prior, Pomdp& model, Matrix& decision);

// Log-likelihood of the data (logged views multiply `decision` when it is not empty).
double log_likelihood(const std::vector<DataView>& data, const Pomdp& model, const Matrix& decision);

}  // namespace dobudget
