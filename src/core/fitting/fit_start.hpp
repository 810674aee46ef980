// Starting points of EM (fit.hpp): random starts that separate the latent values, and warm starts
// from other fits of the same data.
#pragma once
#include <vector>

#include "core/world/dataset.hpp"
#include "core/world/pomdp.hpp"
#include "core/world/seeding.hpp"

namespace dobudget {

// A fitted model offered as a starting point: `decision` (qA) may be null or empty (a pilot-only
// or pooled fit offered to a regime-aware one).
struct WarmStart {
  const Pomdp* model = nullptr;
  const Matrix* decision = nullptr;
};

// Observation frequencies of the data, smoothed by 1e-3 per symbol.
Vector observation_frequencies(const std::vector<DataView>& data, int observations);

// Action frequencies of the logged views (smoothed by 1e-3 per action; uniform without any).
Vector logged_action_frequencies(const std::vector<DataView>& data, int actions);

// A random start whose latent values are spread over the data. Emission rows are seeded from
// short observation windows chosen by k-means++ seeding (Arthur and Vassilvitskii, "k-means++: the
// advantages of careful seeding", SODA 2007): up to 256 windows of min(H + 1, 3) consecutive
// observations are drawn uniformly from the episodes; the first centre is a uniform draw among
// them, each further one is drawn with probability proportional to its squared distance to the
// nearest centre chosen (the symbol histogram of a window is its point), so centres that differ
// are preferred. Then
//   qE(z, .) = 1/2 centre_z + 3/10 (observation frequencies) + 1/5 Dirichlet(1),
// and q0, qT[a] rows and qA rows ~ Dirichlet(1). (The former start, 1/2 frequencies + 1/2
// Dirichlet(1) per emission row, often gave nearly equal rows with two observation symbols, from
// which EM stalls at the symmetric fixed point: DEVELOPERS.md, "Restarts and local optima".)
// `m` must have its sizes set; `decision` is left empty when it is empty.
void random_start(Engine& rng, const std::vector<DataView>& data, const Vector& freq, Pomdp& m, Matrix& decision);

// A warm start: q0, qT and qE of `from`, each row mixed as 0.99 row + 0.01 uniform so that no
// probability is exactly 0 (EM never moves a zero); qA from `from` when it has one, else every row
// = `action_freq` (the logged actions' frequencies).
void warm_start(const WarmStart& from, const Vector& action_freq, Pomdp& m, Matrix& decision);

}  // namespace dobudget
