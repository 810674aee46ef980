#include "core/fitting/collapse.hpp"

#include <algorithm>
#include <cmath>

#include "core/world/sampling.hpp"

namespace dobudget {
namespace {

template <typename A, typename B>
double total_variation(const A& p, const B& q) {
  return 0.5 * (p - q).cwiseAbs().sum();
}

// Splits rows z and y of `m` around their mean (see collapse.hpp).
void split_rows(Engine& rng, int z, int y, Matrix& m) {
  const Eigen::Index n = m.cols();
  const Eigen::RowVectorXd e = 0.5 * (m.row(z) + m.row(y));
  Eigen::RowVectorXd d(n);
  for (Eigen::Index j = 0; j < n; ++j) d(j) = 2.0 * uniform01(rng) - 1.0;
  d.array() -= e.dot(d) / e.sum();
  const double top = d.cwiseAbs().maxCoeff();
  if (!(top > 0.0)) return;
  d /= top;
  m.row(z) = e.array() * (1.0 + 0.9 * d.array());
  m.row(y) = e.array() * (1.0 - 0.9 * d.array());
  m.row(z) /= m.row(z).sum();
  m.row(y) /= m.row(y).sum();
}

}  // namespace

double latent_distance(const Pomdp& m, const Matrix& decision, int z, int y) {
  double d = total_variation(m.emissions.row(z), m.emissions.row(y));
  for (const auto& T : m.transitions) {
    const Eigen::RowVectorXd pz = T.row(z) * m.emissions, py = T.row(y) * m.emissions;
    d = std::max(d, total_variation(pz, py));
  }
  if (decision.size() > 0) d = std::max(d, total_variation(decision.row(z), decision.row(y)));
  return d;
}

std::optional<std::pair<int, int>> collapsed_pair(const Pomdp& m, const Matrix& decision, double threshold) {
  std::optional<std::pair<int, int>> best;
  double closest = threshold;
  for (int z = 0; z < m.states; ++z)
    for (int y = z + 1; y < m.states; ++y) {
      const double d = latent_distance(m, decision, z, y);
      if (d <= closest) {
        closest = d;
        best = std::make_pair(z, y);
      }
    }
  return best;
}

void split_latent_pair(Engine& rng, int z, int y, Pomdp& m, Matrix& decision) {
  split_rows(rng, z, y, m.emissions);
  if (decision.size() > 0) split_rows(rng, z, y, decision);
}

}  // namespace dobudget
