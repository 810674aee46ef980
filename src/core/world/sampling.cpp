#include "core/world/sampling.hpp"

namespace dobudget {

void sample_dirichlet(Engine& rng, double alpha, int k, double* out) {
  boost::random::gamma_distribution<double> gamma(alpha, 1.0);
  double sum = 0.0;
  for (int i = 0; i < k; ++i) {
    out[i] = gamma(rng);
    sum += out[i];
  }
  if (sum > 0.0) {
    for (int i = 0; i < k; ++i) out[i] /= sum;
    return;
  }
  const int pick = std::min(k - 1, static_cast<int>(uniform01(rng) * k));
  for (int i = 0; i < k; ++i) out[i] = (i == pick) ? 1.0 : 0.0;
}

void sample_dirichlet(Engine& rng, const double* alpha, int k, double* out) {
  double sum = 0.0, total = 0.0;
  for (int i = 0; i < k; ++i) {
    out[i] = boost::random::gamma_distribution<double>(alpha[i], 1.0)(rng);
    sum += out[i];
    total += alpha[i];
  }
  if (sum > 0.0) {
    for (int i = 0; i < k; ++i) out[i] /= sum;
    return;
  }
  double u = uniform01(rng) * total, c = 0.0;
  int pick = k - 1;
  for (int i = 0; i < k; ++i) {
    c += alpha[i];
    if (u < c) {
      pick = i;
      break;
    }
  }
  for (int i = 0; i < k; ++i) out[i] = (i == pick) ? 1.0 : 0.0;
}

int categorical_from_uniform(double u, const double* p, int k) {
  double c = 0.0;
  int last = 0;
  for (int i = 0; i < k; ++i) {
    if (p[i] > 0.0) last = i;
    c += p[i];
    if (u < c) return i;
  }
  return last;
}

int sample_categorical(Engine& rng, const double* p, int k) { return categorical_from_uniform(uniform01(rng), p, k); }

}  // namespace dobudget
