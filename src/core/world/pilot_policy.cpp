// Pilot policies that read the record only; see pilot_policy.hpp for the rules.
#include "core/world/pilot_policy.hpp"

#include <stdexcept>

#include "core/world/dataset.hpp"

namespace dobudget {

ActionCounts action_counts(const Dataset& logged, int count, int observations, int actions) {
  ActionCounts c;
  c.observations = observations;
  c.actions = actions;
  c.n.assign(static_cast<std::size_t>(observations) * actions, 0.0);
  for (int i = 0; i < count; ++i) {
    const std::int32_t* o = logged.obs(i);
    const std::int32_t* a = logged.act(i);
    for (int t = 0; t < logged.length(i); ++t) c.n[static_cast<std::size_t>(o[t]) * actions + a[t]] += 1.0;
  }
  return c;
}

void UniformPilot::probabilities(const RecordedHistory&, std::span<double> out) {
  for (int a = 0; a < actions_; ++a) out[static_cast<std::size_t>(a)] = 1.0 / actions_;
}

UsualPracticePilot::UsualPracticePilot(ActionCounts counts, double explore)
    : counts_(std::move(counts)), explore_(explore) {
  if (!(explore >= 0.0 && explore <= 1.0)) throw std::invalid_argument("usual-practice: explore must be in [0, 1]");
}

// p(a | x) = (1 - e) n(x, a) / n(x) + e / A; uniform where n(x) = 0.
void UsualPracticePilot::probabilities(const RecordedHistory& h, std::span<double> out) {
  const int A = counts_.actions, x = h.last_observation();
  double total = 0.0;
  for (int a = 0; a < A; ++a) total += counts_.at(x, a);
  for (int a = 0; a < A; ++a)
    out[static_cast<std::size_t>(a)] =
        total > 0.0 ? (1.0 - explore_) * counts_.at(x, a) / total + explore_ / A : 1.0 / A;
}

ComplementPilot::ComplementPilot(ActionCounts counts, double floor) : counts_(std::move(counts)), floor_(floor) {
  if (!(floor >= 0.0 && floor <= 1.0)) throw std::invalid_argument("complement: floor must be in [0, 1]");
}

// p(a | x) = phi / A + (1 - phi) w(x, a) / sum_b w(x, b), w(x, a) = 1 / (1 + n(x, a)).
// With n(x) = 0 every weight is 1: uniform.
void ComplementPilot::probabilities(const RecordedHistory& h, std::span<double> out) {
  const int A = counts_.actions, x = h.last_observation();
  double sum = 0.0;
  for (int a = 0; a < A; ++a) sum += 1.0 / (1.0 + counts_.at(x, a));
  for (int a = 0; a < A; ++a)
    out[static_cast<std::size_t>(a)] = floor_ / A + (1.0 - floor_) * (1.0 / (1.0 + counts_.at(x, a))) / sum;
}

}  // namespace dobudget
