// The targeted pilot; see targeted_pilot.hpp for the rule and its references.
#include "core/fitting/targeted_pilot.hpp"

#include <stdexcept>

#include "core/fitting/forward_backward.hpp"
#include "core/measures/belief.hpp"
#include "core/world/dataset.hpp"

namespace dobudget {

TargetedPilot::TargetedPilot(Pomdp model, std::vector<Matrix> transition_counts, double prior, double floor)
    : model_(std::move(model)), counts_(std::move(transition_counts)), prior_(prior), floor_(floor) {
  if (!(floor >= 0.0 && floor <= 1.0)) throw std::invalid_argument("targeted: floor must be in [0, 1]");
  if (counts_.size() != static_cast<std::size_t>(model_.actions))
    throw std::invalid_argument("targeted: one count matrix per action");
}

std::vector<double> TargetedPilot::uncertainty(const RecordedHistory& h) const {
  const int Z = model_.states, A = model_.actions;
  // Filtered belief over z_t given o_0..o_t and a_0..a_{t-1} (pilot steps: no decision rule).
  std::vector<double> b(model_.initial.data(), model_.initial.data() + Z), next(static_cast<std::size_t>(Z));
  const auto obs = h.observations();
  const auto act = h.actions();
  if (condition(model_, b.data(), obs[0]) <= 0.0) b.assign(static_cast<std::size_t>(Z), 1.0 / Z);
  for (std::size_t t = 0; t < act.size(); ++t) {
    predict(model_, b.data(), act[t], next.data());
    b = next;
    if (condition(model_, b.data(), obs[t + 1]) <= 0.0) b.assign(static_cast<std::size_t>(Z), 1.0 / Z);
  }
  std::vector<double> u(static_cast<std::size_t>(A), 0.0);
  for (int a = 0; a < A; ++a) {
    const Matrix& N = counts_[static_cast<std::size_t>(a)];
    for (int z = 0; z < Z; ++z) {
      // V(z, a) = (1 - sum_j m_j^2) / (alpha_0 + 1), alpha_j = N_a(z, j) + prior + 1.
      double alpha0 = 0.0;
      for (int j = 0; j < Z; ++j) alpha0 += N(z, j) + prior_ + 1.0;
      double sq = 0.0;
      for (int j = 0; j < Z; ++j) {
        const double m = (N(z, j) + prior_ + 1.0) / alpha0;
        sq += m * m;
      }
      u[static_cast<std::size_t>(a)] += b[static_cast<std::size_t>(z)] * (1.0 - sq) / (alpha0 + 1.0);
    }
  }
  return u;
}

void TargetedPilot::probabilities(const RecordedHistory& h, std::span<double> out) {
  const int A = model_.actions;
  const std::vector<double> u = uncertainty(h);
  double best = u[0];
  for (double x : u) best = std::max(best, x);
  int ties = 0;
  for (double x : u) ties += x == best ? 1 : 0;
  for (int a = 0; a < A; ++a)
    out[static_cast<std::size_t>(a)] = floor_ / A + (u[static_cast<std::size_t>(a)] == best ? (1.0 - floor_) / ties : 0.0);
}

void TargetedPilot::episode_done(const RecordedHistory& h) {
  // The finished episode's expected transition counts under the fitted model, added to N.
  Dataset one;
  one.horizon = h.step();
  one.count = 1;
  one.observations.assign(h.observations().begin(), h.observations().end());
  one.actions.assign(h.actions().begin(), h.actions().end());
  if (one.horizon == 0) return;
  ForwardBackward fb(model_.states, model_.actions, model_.observations, one.horizon);
  fb.load(model_, nullptr);
  ExpectedCounts c;
  c.reset(model_.states, model_.actions, model_.observations);
  fb.accumulate(DataView{&one, 1, Regime::pilot}, c);
  for (std::size_t a = 0; a < counts_.size(); ++a) counts_[a] += c.transitions[a];
}

}  // namespace dobudget
