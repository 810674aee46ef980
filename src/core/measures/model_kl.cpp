#include "core/measures/model_kl.hpp"

#include <algorithm>
#include <cmath>
#include <limits>

#include "core/measures/belief.hpp"

namespace dobudget {

void predictives(const Pomdp& m, const Dataset& h, std::vector<double>& out, const StopToken& stop) {
  const int H = h.horizon, O = m.observations;
  out.resize(static_cast<std::size_t>(h.count) * (H + 1) * O);
  std::vector<double> b(static_cast<std::size_t>(m.states)), p(static_cast<std::size_t>(m.states));
  for (int i = 0; i < h.count; ++i) {
    if (i % 256 == 0) stop.poll();
    const auto* o = h.obs(i);
    const auto* a = h.act(i);
    double* pred = out.data() + static_cast<std::size_t>(i) * (H + 1) * O;
    for (int s = 0; s < m.states; ++s) b[static_cast<std::size_t>(s)] = m.initial(s);
    for (int t = 0; t <= H; ++t) {
      if (t > 0) predict(m, b.data(), a[t - 1], p.data());
      else p = b;
      double* q = pred + static_cast<std::ptrdiff_t>(t) * O;
      observation_distribution(m, p.data(), q);
      // The belief sums to 1 only up to rounding: normalise, so that a certain observation has
      // probability exactly 1 and a perfect model gives KL exactly 0.
      double sum = 0.0;
      for (int k = 0; k < O; ++k) sum += q[k];
      for (int k = 0; k < O; ++k) q[k] /= sum;
      if (condition(m, p.data(), o[t]) == 0.0) {
        // The history is impossible in this model: keep predicting from the prior belief.
        for (int s = 0; s < m.states; ++s) p[static_cast<std::size_t>(s)] = 1.0 / m.states;
      }
      b.swap(p);
    }
  }
}

EvaluationSet make_evaluation_set(const Pomdp& truth, Dataset histories, const StopToken& stop) {
  EvaluationSet e;
  e.histories = std::move(histories);
  predictives(truth, e.histories, e.truth, stop);
  e.log_truth.resize(e.truth.size());
  for (std::size_t k = 0; k < e.truth.size(); ++k) e.log_truth[k] = e.truth[k] > 0.0 ? std::log(e.truth[k]) : 0.0;
  return e;
}

double model_kl(const EvaluationSet& e, const Pomdp& fitted, const StopToken& stop) {
  std::vector<double> q;
  predictives(fitted, e.histories, q, stop);
  double kl = 0.0;
  for (std::size_t k = 0; k < q.size(); ++k) {
    const double p = e.truth[k];
    if (p <= 0.0) continue;
    if (q[k] <= 0.0) return std::numeric_limits<double>::infinity();
    kl += p * (e.log_truth[k] - std::log(q[k]));
  }
  const double n = static_cast<double>(e.histories.count) * (e.histories.horizon + 1);
  return std::max(0.0, kl / n);  // KL >= 0 (Gibbs' inequality); a negative sum is rounding
}

}  // namespace dobudget
