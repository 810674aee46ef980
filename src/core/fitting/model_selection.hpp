// How many latent values the team's records support (issue 9): fits of the regime-aware latent
// model at several sizes, each scored by the Bayesian information criterion and by the
// log-likelihood of held-out episodes, and the choice of one size.
//
// Parameter count of the model with Z latent values, A actions and O observation symbols (free
// numbers: each probability row of length k has k - 1):
//   k(Z) = (Z - 1)              initial distribution q0
//        + A Z (Z - 1)          transitions qT[a](z, .)
//        + Z (O - 1)            emissions qE(z, .)
//        + Z (A - 1)            decision rule qA(z, .), only when there are logged episodes
// Bayesian information criterion (Schwarz, "Estimating the dimension of a model", Annals of
// Statistics 6(2), 1978):  BIC = -2 log L + k ln n  (smaller is better).
// n is the number of observed steps (every o_t of every episode, sum_i (length_i + 1)), not the
// number of episodes: the information about transitions and emissions grows with every step
// seen, and episodes of different lengths carry different amounts of it; for hidden Markov
// models n is taken as the number of observations (Zucchini, MacDonald and Langrock, "Hidden
// Markov Models for Time Series", 2nd ed., 2016, sec. 6.1; from memory).
//
// Held-out log-likelihood: the episodes of each regime are shuffled (a seeded stream) and dealt
// into `folds` folds; for each fold the model is fitted on the others and the held-out episodes
// are scored (the logged ones with the fitted decision rule); every episode is scored once, and
// heldout_loglik is the sum.
//
// The choice (`auto`): the size with the highest held-out log-likelihood, unless a smaller size
// is within one standard error of it, in which case the smallest such size (the one-standard-error
// rule: Hastie, Tibshirani and Friedman, "The Elements of Statistical Learning", 2nd ed., 2009,
// sec. 7.10). The standard error is that of the paired difference: with d_i the held-out
// log-likelihood of episode i under the best size minus under size Z, se = sqrt(N var(d)), the
// standard error of sum_i d_i. Sizes are tried in ascending order and the search stops after two
// sizes in a row that do not improve the best held-out log-likelihood. BIC is reported beside.
#pragma once
#include <cstdint>
#include <vector>

#include "core/fitting/fit.hpp"
#include "core/world/dataset.hpp"
#include "core/world/pomdp.hpp"
#include "core/running/settings.hpp"
#include "core/running/stop.hpp"

namespace dobudget {

// k(Z) above.
long long parameter_count(int latent, int actions, int observations, bool decision_rule);

// -2 log L + k ln n.
double bic(double loglik, long long parameters, double n);

struct SelectionSettings {
  std::vector<int> sizes{1, 2, 3, 4, 5, 6, 7, 8};  // candidate latent sizes, ascending
  int folds = 5;          // episode folds for the held-out log-likelihood; 0: not computed
  bool stop_early = true; // stop after two sizes in a row that do not improve the best held-out
};

struct SizeFit {
  int latent_states = 0;
  FitResult fit;              // on every episode
  long long parameters = 0;
  double bic = 0.0;
  bool heldout = false;       // heldout_* computed
  double heldout_loglik = 0.0;  // sum over episodes, each scored by the fit without its fold
  double heldout_se = 0.0;      // se of the paired difference to the best size (0 for the best)
  int fold_fits_converged = 0;  // fold fits that met the stopping rule
  int fold_fits_confirmed = 0;  // fold fits whose best optimum a second start reached
  bool chosen = false;
};

struct Selection {
  std::vector<SizeFit> sizes;  // in the order tried (ascending)
  int chosen = 0;              // index into sizes
  double observations = 0.0;   // n of the BIC
  int episodes = 0;
  int folds = 0;               // folds used for the held-out log-likelihood (0: not computed)
  bool decision_rule = false;  // there were logged episodes
  const SizeFit& best() const { return sizes[static_cast<std::size_t>(chosen)]; }
};

// Fits the regime-aware latent model to the records (logged episodes explained by a latent
// decision rule, pilot episodes as interventions; either dataset may be empty) at each size of
// `selection` and chooses one. `shape` gives actions, observations, rewards, horizon and discount;
// `fit` the EM settings (its latent_states is ignored). Deterministic in `seed`: every fit and the
// fold shuffle draw from their own stream (Purpose::records_fit).
Selection select_latent_states(const Dataset& logged, const Dataset& pilot, const Pomdp& shape,
                               const FitSettings& fit, const SelectionSettings& selection, std::uint64_t seed,
                               const StopToken& stop = {});

// Episodes `index` of `d` (in that order) as a dataset of the same horizon.
Dataset subset(const Dataset& d, const std::vector<int>& index);

}  // namespace dobudget
