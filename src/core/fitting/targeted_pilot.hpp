// The targeted pilot (issue 13): fit the regime-aware model to the unit's logged episodes once
// (core/running/pilot_design.hpp), then at each pilot step take the action whose next transition
// is least known under that fit, with a floor phi spread uniformly:
//   p(a | record) = phi / A + (1 - phi) [a = a*],   a* = argmax_a U(a | record)  (ties shared equally),
//   U(a | record) = sum_z b(z) V(z, a),
//   V(z, a) = (1 - sum_j m_j^2) / (alpha_0 + 1),  m_j = alpha_j / alpha_0,  alpha_j = N_a(z, j) + prior + 1,
// where b is the belief over the fitted latent value given the record (filtering under the fitted
// interventional model: Kaelbling, Littman and Cassandra 1998, sec. 3.2; belief.hpp), and V is the
// total posterior variance sum_j Var(theta_j) of the transition row qT[a](z, .) under its
// Dirichlet posterior with expected counts N (Kotz, Balakrishnan and Johnson, "Continuous
// Multivariate Distributions", vol. 1, 2000, ch. 49: Var(theta_j) = m_j (1 - m_j) / (alpha_0 + 1)).
// N starts at the expected transition counts of the fit's E-step on the logged episodes
// (forward_backward.hpp) and grows, after each pilot episode, by that episode's expected counts
// under the same fitted model: the pilot adapts to what it has already tried. The model itself is
// not refitted. The policy reads the record only (pilot_policy.hpp).
#pragma once
#include <span>
#include <vector>

#include "core/world/pilot_policy.hpp"
#include "core/world/pomdp.hpp"

namespace dobudget {

class TargetedPilot final : public PilotPolicy {
 public:
  // model: the interventional part (q0, qT, qE) of the design fit; transition_counts: N_a(z, z')
  // (A matrices Z x Z); prior: the fit's Dirichlet pseudo-count; floor: phi in [0, 1].
  TargetedPilot(Pomdp model, std::vector<Matrix> transition_counts, double prior, double floor);

  void probabilities(const RecordedHistory& history, std::span<double> out) override;
  void episode_done(const RecordedHistory& history) override;

  // U(a | record) for every action (see above).
  std::vector<double> uncertainty(const RecordedHistory& history) const;
  const std::vector<Matrix>& transition_counts() const { return counts_; }

 private:
  Pomdp model_;
  std::vector<Matrix> counts_;
  double prior_, floor_;
};

}  // namespace dobudget
