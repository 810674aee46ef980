#include "core/fitting/fit_start.hpp"

#include <algorithm>

#include "core/world/sampling.hpp"

namespace dobudget {
namespace {

// Uniform index in [0, n).
int uniform_index(Engine& rng, long long n) {
  return static_cast<int>(std::min<long long>(n - 1, static_cast<long long>(uniform01(rng) * static_cast<double>(n))));
}

template <typename Row>
void mix_uniform(Row&& row, double weight) {
  const double u = 1.0 / static_cast<double>(row.size());
  for (Eigen::Index j = 0; j < row.size(); ++j) row(j) = (1.0 - weight) * row(j) + weight * u;
}

}  // namespace

Vector observation_frequencies(const std::vector<DataView>& data, int O) {
  Vector f = Vector::Constant(O, 1e-3);
  for (const auto& v : data)
    for (int i = 0; i < v.count; ++i)
      for (int t = 0; t <= v.data->length(i); ++t) f(v.data->obs(i)[t]) += 1.0;
  return f / f.sum();
}

Vector logged_action_frequencies(const std::vector<DataView>& data, int A) {
  Vector f = Vector::Constant(A, 1e-3);
  for (const auto& v : data)
    if (v.regime == Regime::logged)
      for (int i = 0; i < v.count; ++i)
        for (int t = 0; t < v.data->length(i); ++t) f(v.data->act(i)[t]) += 1.0;
  return f / f.sum();
}

void random_start(Engine& rng, const std::vector<DataView>& data, const Vector& freq, Pomdp& m, Matrix& decision) {
  const int Z = m.states, O = m.observations;
  sample_dirichlet(rng, 1.0, Z, m.initial.data());
  for (auto& T : m.transitions)
    for (int z = 0; z < Z; ++z) sample_dirichlet(rng, 1.0, Z, T.row(z).data());
  for (int z = 0; z < decision.rows(); ++z) sample_dirichlet(rng, 1.0, m.actions, decision.row(z).data());

  // Candidate windows: symbol histograms of w consecutive observations of uniformly drawn episodes.
  long long episodes = 0;
  for (const auto& v : data) episodes += v.count;
  std::vector<Vector> points;
  if (episodes > 0) {
    const int n = static_cast<int>(std::min<long long>(256, episodes * 4));
    for (int k = 0; k < n; ++k) {
      long long e = uniform_index(rng, episodes);
      std::size_t vi = 0;
      while (e >= data[vi].count) e -= data[vi++].count;
      const Dataset& d = *data[vi].data;
      const int len = d.length(static_cast<int>(e));
      const int w = std::min(len + 1, 3);
      const int t0 = uniform_index(rng, len + 2 - w);
      Vector h = Vector::Zero(O);
      for (int t = t0; t < t0 + w; ++t) h(d.obs(static_cast<int>(e))[t]) += 1.0 / w;
      points.push_back(std::move(h));
    }
  }
  // k-means++ seeding over the windows: D^2 sampling of Z centres.
  std::vector<Vector> centres;
  if (!points.empty()) {
    centres.push_back(points[static_cast<std::size_t>(uniform_index(rng, static_cast<long long>(points.size())))]);
    std::vector<double> d2(points.size());
    while (static_cast<int>(centres.size()) < Z) {
      // Squared distance of every window to its nearest centre.
      double total = 0.0;
      for (std::size_t k = 0; k < points.size(); ++k) {
        double best = (points[k] - centres[0]).squaredNorm();
        for (std::size_t c = 1; c < centres.size(); ++c) best = std::min(best, (points[k] - centres[c]).squaredNorm());
        d2[k] = best;
        total += best;
      }
      const double u = uniform01(rng);
      if (total <= 0.0) {  // every window coincides with a centre: take any
        centres.push_back(points[static_cast<std::size_t>(uniform_index(rng, static_cast<long long>(points.size())))]);
        continue;
      }
      for (double& x : d2) x /= total;
      centres.push_back(points[static_cast<std::size_t>(categorical_from_uniform(u, d2.data(), static_cast<int>(d2.size())))]);
    }
  }
  Vector row(O);
  for (int z = 0; z < Z; ++z) {
    sample_dirichlet(rng, 1.0, O, row.data());
    const Vector centre = centres.empty() ? freq : centres[static_cast<std::size_t>(z)];
    m.emissions.row(z) = (0.5 * centre + 0.3 * freq + 0.2 * row).transpose();
  }
}

void warm_start(const WarmStart& from, const Vector& action_freq, Pomdp& m, Matrix& decision) {
  const Pomdp& f = *from.model;
  constexpr double w = 0.01;
  m.initial = f.initial;
  mix_uniform(m.initial, w);
  for (std::size_t a = 0; a < m.transitions.size(); ++a) {
    m.transitions[a] = f.transitions[a];
    for (int z = 0; z < m.states; ++z) mix_uniform(m.transitions[a].row(z), w);
  }
  m.emissions = f.emissions;
  for (int z = 0; z < m.states; ++z) mix_uniform(m.emissions.row(z), w);
  if (decision.size() == 0) return;
  for (int z = 0; z < decision.rows(); ++z) {
    if (from.decision != nullptr && from.decision->size() > 0) {
      decision.row(z) = from.decision->row(z);
      mix_uniform(decision.row(z), w);
    } else {
      decision.row(z) = action_freq.transpose();
    }
  }
}

}  // namespace dobudget
