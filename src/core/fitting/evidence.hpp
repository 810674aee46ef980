// What the records show about each (latent value, action) pair (issue 9): the expected number of
// transitions out of latent value z under action a, from the E-step at the fitted model,
//   N_r(z, a) = sum_{episodes of regime r} sum_t P(z_t = z | episode) [a_t = a]
//             = sum_z' xi-counts qT[a](z, z')   (forward_backward.hpp),
// split by regime r (logged, pilot). Pairs with little evidence in both regimes are the action
// effects the records leave open: what a pilot has to inform.
#pragma once
#include "core/fitting/forward_backward.hpp"
#include "core/world/dataset.hpp"
#include "core/world/pomdp.hpp"

namespace dobudget {

// Expected counts of one E-step at the fitted model, per regime (logged episodes with the
// decision rule `decision` when it is not empty, pilot episodes as interventions).
struct RegimeCounts {
  ExpectedCounts logged, pilot;
};
RegimeCounts expected_counts_by_regime(const Pomdp& model, const Matrix& decision, const Dataset& logged,
                                       const Dataset& pilot);

// The two regimes' counts added.
ExpectedCounts combined(const RegimeCounts& counts);

struct Evidence {
  Matrix logged, pilot;  // Z x A: N_r(z, a) above
};
Evidence transition_evidence(const RegimeCounts& counts);

}  // namespace dobudget
