// Collapsed latent values of a fitted model, and how EM escapes them (fit.hpp).
//
// Two latent values z and y have collapsed onto one another when nothing in the model tells them
// apart: the largest total-variation distance between what they predict,
//   d(z, y) = max( TV(qE(z, .), qE(y, .)),
//                  max_a TV(sum_x qT[a](z, x) qE(x, .), sum_x qT[a](y, x) qE(x, .)),   (next observation)
//                  TV(qA(z, .), qA(y, .)) )                                          (regime-aware only)
// with TV(p, q) = 1/2 sum_j |p_j - q_j|, is at most `threshold`. Such a model is one with a latent
// value less, and a point of it is a fixed point of EM from which EM moves away only slowly (a
// saddle of the objective when the data support more latent values). Latent values that emit alike
// but lead to different observations (aliased states, common in POMDPs) are not collapsed.
//
// The escape splits the pair (as in split-and-merge EM: Ueda, Nakano, Ghahramani and Hinton,
// "SMEM algorithm for mixture models", Neural Computation 12(9), 2000): with e the mean of the two
// emission rows and a random direction d (d_j uniform in [-1, 1], centred so that sum_j e_j d_j = 0
// and scaled to max_j |d_j| = 1),
//   qE(z, j) = e_j (1 + 0.9 d_j),   qE(y, j) = e_j (1 - 0.9 d_j),
// and the same for the two decision rows (own direction) of a regime-aware fit. EM then continues
// from the split model; fit() keeps the split's end only if its objective is higher.
#pragma once
#include <optional>
#include <utility>

#include "core/world/pomdp.hpp"
#include "core/world/seeding.hpp"

namespace dobudget {

// d(z, y) above; `decision` may be empty.
double latent_distance(const Pomdp& model, const Matrix& decision, int z, int y);

// The closest pair (z < y) when its distance is at most `threshold`.
std::optional<std::pair<int, int>> collapsed_pair(const Pomdp& model, const Matrix& decision, double threshold);

// Splits the pair (z, y) as above, drawing the directions from `rng`.
void split_latent_pair(Engine& rng, int z, int y, Pomdp& model, Matrix& decision);

}  // namespace dobudget
