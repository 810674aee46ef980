// Belief filtering in a finite POMDP (Kaelbling, Littman and Cassandra, "Planning and acting in
// partially observable stochastic domains", Artificial Intelligence 101, 1998, sec. 3.2):
//   predict:   p(s') = sum_s b(s) T[a](s, s')
//   observe:   p(o)  = sum_s' p(s') E(s', o)
//   condition: b'(s') = p(s') E(s', o) / p(o)
// All functions write into caller-owned buffers (no allocation), sized model.states or
// model.observations.
#pragma once
#include "core/world/pomdp.hpp"

namespace dobudget {

// out(s') = sum_s b(s) T[a](s, s')
inline void predict(const Pomdp& m, const double* b, int a, double* out) {
  const int n = m.states;
  const double* T = m.transitions[static_cast<std::size_t>(a)].data();  // row-major S x S
  for (int j = 0; j < n; ++j) out[j] = 0.0;
  for (int i = 0; i < n; ++i) {
    const double bi = b[i];
    if (bi == 0.0) continue;
    const double* row = T + static_cast<std::ptrdiff_t>(i) * n;
    for (int j = 0; j < n; ++j) out[j] += bi * row[j];
  }
}

// out(o) = sum_s p(s) E(s, o)
inline void observation_distribution(const Pomdp& m, const double* p, double* out) {
  const int n = m.states, k = m.observations;
  const double* E = m.emissions.data();  // row-major S x O
  for (int o = 0; o < k; ++o) out[o] = 0.0;
  for (int s = 0; s < n; ++s) {
    const double ps = p[s];
    if (ps == 0.0) continue;
    const double* row = E + static_cast<std::ptrdiff_t>(s) * k;
    for (int o = 0; o < k; ++o) out[o] += ps * row[o];
  }
}

// p(s) <- p(s) E(s, o) / Z in place; returns Z = sum_s p(s) E(s, o) (0 if o is impossible,
// in which case p is left unnormalised at zero).
inline double condition(const Pomdp& m, double* p, int o) {
  const int n = m.states, k = m.observations;
  const double* E = m.emissions.data();
  double z = 0.0;
  for (int s = 0; s < n; ++s) {
    p[s] *= E[static_cast<std::ptrdiff_t>(s) * k + o];
    z += p[s];
  }
  if (z > 0.0)
    for (int s = 0; s < n; ++s) p[s] /= z;
  return z;
}

}  // namespace dobudget
