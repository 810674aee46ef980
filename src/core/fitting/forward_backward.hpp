// Scaled forward-backward for the discrete input-output hidden Markov model of docs/design.md, "The latent model"
// (Bengio and Frasconi, "Input-output HMMs for sequence processing", IEEE TNN 7(5), 1996;
// scaling as in Rabiner, "A tutorial on hidden Markov models...", Proc. IEEE 77(2), 1989, sec. V.A).
//
// Per episode o_0, a_0, ..., a_{L-1}, o_L (L = length(i) <= H), with e_t(z) = qE(z, o_t) w_t(z) and
// w_t(z) = qA(z, a_t) on logged steps t < L of a regime-aware fit and 1 otherwise:
//   alpha_0(z)      = q0(z) e_0(z),                                 c_0 = sum_z alpha_0(z)
//   alpha_{t+1}(z') = [sum_z alpha_t(z) qT[a_t](z, z')] e_{t+1}(z'),  c_{t+1} = sum_z' alpha_{t+1}(z')
//   each alpha_t then multiplied by 1 / c_t (the normalised alpha is used from there on)
//   beta_L(z) = 1,  u_{t+1}(z') = (e_{t+1}(z') beta_{t+1}(z')) (1 / c_{t+1}),  beta_t(z) = sum_z' qT[a_t](z, z') u_{t+1}(z')
//   log p(episode) = sum_t log c_t
//   gamma_t(z) = alpha_t(z) beta_t(z)
//   xi_t(z, z') = alpha_t(z) qT[a_t](z, z') u_{t+1}(z')
// The E-step accumulates expected counts; the M-step (maximise) is the MAP update under a
// symmetric Dirichlet pseudo-count `prior` on every row: q(j | i) = (N(i, j) + prior) / sum_j (...).
//
// Batched kernel (issue 11): kLanes episodes of one view run at once, one per vector lane
// (structure of arrays, lane index fastest). Every lane performs exactly the sequence of IEEE
// operations of its episode run alone: each lane's parameters for its own a_t and o_t are selected
// (a table permute, or a chain of selections: both move bits without arithmetic), every sum starts
// from +0 and runs in a fixed order (z ascending; over t descending for the counts), and steps past
// an episode's end are left out by the same selections. Episode i of a call is counted in lane
// i mod kLanes, and the lanes' counts are added in lane order at the end of the call. kLanes is
// fixed, not the register width, so the SSE2, AVX2 and AVX-512 builds give the bits of a plain
// scalar loop over the episodes written that way (the test "every build of the kernel performs the
// operations of one episode run alone", tests/core/fitting/test_forward_backward.cpp); across
// machines this assumes the same libm `log`. Precondition (checked where data is read and
// simulated): every o_t is in 0..O-1 and every a_t in 0..A-1.
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

// Which compiled build of the batched kernel runs: all give identical results; `best` is the
// widest one this CPU supports (chosen once, at first use).
enum class KernelPath { baseline, avx2, avx512, best };
// Whether this CPU (and this compiler's build) can run `path`.
bool kernel_path_supported(KernelPath path);
// The path `best` resolves to here.
KernelPath best_kernel_path();
const char* kernel_path_name(KernelPath path);

// Reusable workspace for one model: all buffers are sized once, so accumulate() does no
// allocation. `decision` (Z x A) may be null: then no episode multiplies a decision rule.
class ForwardBackward {
 public:
  static constexpr int kLanes = 8;  // episodes per batch (fixed: see the file comment)

  ForwardBackward(int latent, int actions, int observations, int max_horizon);

  // Loads the parameters.
  void load(const Pomdp& model, const Matrix* decision);

  // E-step over the episodes of `view`; logged episodes multiply the decision rule when one was
  // loaded. Returns the summed log-likelihood (also added to counts.loglik).
  double accumulate(const DataView& view, ExpectedCounts& counts);

  // Log-likelihood only (forward pass).
  double log_likelihood(const DataView& view);

  // For tests and benchmarks: run a given build of the kernel (must be supported).
  void set_kernel_path(KernelPath path);
  KernelPath kernel_path() const { return path_; }

  struct Block;  // one batch of kLanes episodes (defined in forward_backward.cpp)

 private:
  double run(const DataView& view, bool counts);

  int Z_, A_, O_, H_;
  KernelPath path_;
  std::vector<double> q0_, qT_, qE_, qA_;  // qT_: [a][z][z'], qE_: [z][o], qA_: [z][a]
  std::vector<double> pT_, pE_, pA_;       // selection tables of 8 slots: [z][z'][a], [z][o], [z][a]
  bool has_decision_ = false;
  // Per batch (lane index fastest): alpha, e, gamma [t][z][l], u masked to the lane's steps
  // [t][z'][l], scale and 1/scale [t][l], lane liveness [l], beta [z][l], lengths.
  std::vector<double> alpha_, e_, g_, ul_, scale_, inv_, live_, beta_;
  std::vector<int> len_;
  std::vector<double> ob_, ac_;  // o_t and a_t [t][l], -1 past the end
  // Per call, summed over batches, per lane: X [a][z][z'][l] = sum alpha_t(z) u_{t+1}(z'),
  // gamma by observation [o][z][l], by action [a][z][l], initial [z][l].
  std::vector<double> X_, gE_, gA_, g0_;
};

// MAP M-step: writes the new q0, qT, qE (and qA when decision is not null) into model/decision.
void maximise(const ExpectedCounts& counts, double prior, Pomdp& model, Matrix* decision);

// Log of the Dirichlet(prior + 1) density kernel of the parameters, sum prior * log q over every
// entry of every row (added to the log-likelihood it gives the EM objective, which never decreases).
double log_prior(const Pomdp& model, const Matrix* decision, double prior);

}  // namespace dobudget
