// Plausible worlds given the team's records (issue 9): an approximate posterior of the
// regime-aware latent model. At the fitted model (maximum a posteriori, fit.hpp) the E-step gives
// expected counts N (evidence.hpp); each probability row is then drawn independently from
//   q0        ~ Dirichlet(N_0(.) + c)
//   qT[a](z,.) ~ Dirichlet(N_T[a](z, .) + c)
//   qE(z, .)  ~ Dirichlet(N_E(z, .) + c)
//   qA(z, .)  ~ Dirichlet(N_A(z, .) + c)      (the decision rule, which becomes the world's logger)
// with c the prior's concentration (the conjugate update of a symmetric Dirichlet(c) prior on each
// row with the expected counts as data; Kotz, Balakrishnan and Johnson, "Continuous Multivariate
// Distributions", vol. 1, 2nd ed., 2000, ch. 49). Where the records are rich the rows concentrate on
// the fitted rows (mean (N + c) / (|N| + k c), variance of order 1 / |N|); where they are silent
// (N = 0: an action never taken in some latent value) a row follows the prior, Dirichlet(c, ..., c):
// c = 1 (the default, kDefaultConcentration) is uniform over the simplex; larger c pulls the rows
// towards uniform, smaller c towards the corners (near-deterministic effects).
// Fixing the latent labelling at the fit (no label switching) and treating the rows as
// independent given the counts are the approximations.
#pragma once
#include "core/fitting/forward_backward.hpp"
#include "core/world/pomdp.hpp"
#include "core/world/seeding.hpp"

namespace dobudget {

inline constexpr double kDefaultConcentration = 1.0;

// What the draws need: the fitted model (sizes, rewards; horizon and discount are the caller's)
// and the expected counts at the fit over every episode.
struct RecordsPosterior {
  Pomdp fitted;
  Matrix decision;  // Z x A; empty when there were no logged episodes (then the logger is drawn from the prior)
  ExpectedCounts counts;
};

// One plausible world from `rng` with concentration c (draws rows in the order q0, qT[0..A-1] by
// row, qE by row, qA by row). Its model has the fitted model's sizes, rewards, horizon and discount.
Environment draw_plausible_world(const RecordsPosterior& posterior, double concentration, Engine& rng);

}  // namespace dobudget
