// Scaled forward-backward for the discrete input-output hidden Markov model of docs/design.md, "The latent model"
// (Bengio and Frasconi, "Input-output HMMs for sequence processing", IEEE TNN 7(5), 1996;
// scaling as in Rabiner, "A tutorial on hidden Markov models...", Proc. IEEE 77(2), 1989, sec. V.A).
//
// Per episode o_0, a_0, ..., a_{H-1}, o_H, with w_t(z) = qA(z, a_t) on logged steps t < H of a
// regime-aware fit and 1 otherwise:
//   alpha_0(z)     = q0(z) qE(z, o_0) w_0(z) / c_0
//   alpha_{t+1}(z') = [sum_z alpha_t(z) qT[a_t](z, z')] qE(z', o_{t+1}) w_{t+1}(z') / c_{t+1}
//   beta_H(z) = 1,  beta_t(z) = sum_z' qT[a_t](z, z') qE(z', o_{t+1}) w_{t+1}(z') beta_{t+1}(z') / c_{t+1}
//   log p(episode) = sum_t log c_t
//   gamma_t(z) = alpha_t(z) beta_t(z)
//   xi_t(z, z') = alpha_t(z) qT[a_t](z, z') qE(z', o_{t+1}) w_{t+1}(z') beta_{t+1}(z') / c_{t+1}
// The E-step accumulates expected counts; the M-step (maximise) is the MAP update under a
// symmetric Dirichlet pseudo-count `prior` on every row: q(j | i) = (N(i, j) + prior) / sum_j (...).
#pragma once
#include <vector>

#include "core/world/dataset.hpp"
#include "core/world/pomdp.hpp"

namespace dobudget {

// Expected counts of one E-step (row-major, like the model).
struct ExpectedCounts {
  Vector initial;                   // Z
  std::vector<Matrix> transitions;  // A x (Z x Z)
  Matrix emissions;                 // Z x O
  Matrix decision;                  // Z x A (logged steps of a regime-aware fit only)
  double loglik = 0.0;              // sum of log p(episode) over the episodes seen

  void reset(int latent, int actions, int observations);
};

// Reusable workspace for one model: all buffers are sized once, so accumulate() does no
// allocation. `decision` (Z x A) may be null: then no episode multiplies a decision rule.
class ForwardBackward {
 public:
  ForwardBackward(int latent, int actions, int observations, int max_horizon);

  // Loads the parameters (precomputes M[a][o](z, z') = qT[a](z, z') qE(z', o)).
  void load(const Pomdp& model, const Matrix* decision);

  // E-step over the episodes of `view`; logged episodes multiply the decision rule when one was
  // loaded. Returns the summed log-likelihood (also added to counts.loglik).
  double accumulate(const DataView& view, ExpectedCounts& counts);

  // Log-likelihood only (forward pass).
  double log_likelihood(const DataView& view);

 private:
  template <int ZC>
  double run_episodes(const Dataset& d, int count, bool logged, ExpectedCounts& counts);
  template <int ZC>
  double forward(const std::int32_t* o, const std::int32_t* a, int horizon, bool logged);
  template <int ZC>
  void backward_and_count(const std::int32_t* o, const std::int32_t* a, int horizon, bool logged, ExpectedCounts& c);

  int Z_, A_, O_, H_;
  std::vector<double> q0_, qE_, qA_, M_;  // M_: [a][o][z][z'] = qT[a](z, z') qE(z', o)
  bool has_decision_ = false;
  std::vector<double> alpha_, scale_, beta_, next_, tmp_;  // alpha_: (H+1) x Z
  std::vector<double> outer_;                              // [a][o][z][z'] accumulated xi / M
  std::vector<double> gamma_E_, gamma_A_;                  // [o][z] and [a][z] accumulated gamma
};

// MAP M-step: writes the new q0, qT, qE (and qA when decision is not null) into model/decision.
void maximise(const ExpectedCounts& counts, double prior, Pomdp& model, Matrix* decision);

// Log of the Dirichlet(prior + 1) density kernel of the parameters, sum prior * log q over every
// entry of every row (added to the log-likelihood it gives the EM objective, which never decreases).
double log_prior(const Pomdp& model, const Matrix* decision, double prior);

}  // namespace dobudget
