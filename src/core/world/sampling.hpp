// Samplers built on Boost.Random distributions (output specified by the algorithm, so identical
// on every platform), never std:: distributions.
#pragma once
#include <boost/random/gamma_distribution.hpp>
#include <boost/random/uniform_01.hpp>

#include "core/world/pomdp.hpp"
#include "core/world/seeding.hpp"

namespace dobudget {

// Dirichlet(alpha, ..., alpha) of size k written to out: x_i = g_i / sum_j g_j with
// g_i ~ Gamma(alpha, 1) (Devroye, Non-Uniform Random Variate Generation, 1986, ch. XI.4).
// For very small alpha every g_i can underflow to 0; the limit of Dirichlet(alpha) as alpha -> 0
// is a one-hot vector at a uniformly chosen index, which is returned then.
void sample_dirichlet(Engine& rng, double alpha, int k, double* out);

// Dirichlet(alpha_0, ..., alpha_{k-1}) written to out: x_i = g_i / sum_j g_j with
// g_i ~ Gamma(alpha_i, 1) (same reference). Every alpha_i must be positive. When every g_i
// underflows to 0 (tiny alphas), the limit of Dirichlet(c alpha) as c -> 0 is returned: a one-hot
// vector at index i with probability alpha_i / sum_j alpha_j.
void sample_dirichlet(Engine& rng, const double* alpha, int k, double* out);

// Index i with probability p[i] (p sums to 1): inverse transform on one uniform(0,1) draw.
int sample_categorical(Engine& rng, const double* p, int k);

// Inverse transform with a given uniform u in [0, 1): smallest i with u < p[0] + ... + p[i];
// the last index with positive mass when rounding leaves u above the total.
int categorical_from_uniform(double u, const double* p, int k);

inline double uniform01(Engine& rng) { return boost::random::uniform_01<double>()(rng); }

}  // namespace dobudget
