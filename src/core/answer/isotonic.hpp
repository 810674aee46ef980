// Weighted isotonic regression by pool-adjacent-violators (PAVA).
//
// Given values y_1..y_K and positive weights w_1..w_K, the increasing fit is the L2 projection
//   f = argmin sum_i w_i (y_i - f_i)^2   subject to   f_1 <= f_2 <= ... <= f_K.
// PAVA scans left to right, keeping a stack of blocks; whenever the newest block's weighted mean
// is below the previous block's, the two are pooled (weighted mean, summed weight). The solution
// is piecewise constant and each block's value is the weighted mean of the inputs it covers.
// Barlow, Bartholomew, Bremner and Brunk, "Statistical Inference under Order Restrictions"
// (Wiley, 1972), ch. 1; de Leeuw, Hornik and Mair, "Isotone optimization in R: pool-adjacent-
// violators algorithm (PAVA) and active set methods", J. Stat. Softw. 32(5), 2009, sec. 2.
// The decreasing fit is the increasing fit of -y, negated.
//
// Used by the answer (docs/design.md, "Needed pilot episodes"): the success fraction is made non-decreasing in the pilot
// budget, the mean measure non-increasing, with weights = number of pairs at each budget.
#pragma once
#include <cstddef>
#include <span>
#include <vector>

namespace dobudget {

// Reusable scratch space, so that repeated fits (one per bootstrap resample) do not allocate
// once the workspace has grown to the largest size used.
struct IsotonicWorkspace {
  std::vector<double> block_value;   // weighted mean of each block
  std::vector<double> block_weight;  // summed weight of each block
  std::vector<std::size_t> block_end;  // one past the last index covered by each block
};

// Increasing (non-decreasing) weighted isotonic fit of y, written to out (out.size() == y.size()).
// Weights must be positive and finite, y finite; throws std::invalid_argument otherwise.
// out may alias y.
void isotonic_increasing(std::span<const double> y, std::span<const double> w, std::span<double> out,
                         IsotonicWorkspace& ws);
// Non-increasing fit: the increasing fit of -y, negated.
void isotonic_decreasing(std::span<const double> y, std::span<const double> w, std::span<double> out,
                         IsotonicWorkspace& ws);

// Allocating conveniences.
std::vector<double> isotonic_increasing(std::span<const double> y, std::span<const double> w);
std::vector<double> isotonic_decreasing(std::span<const double> y, std::span<const double> w);

}  // namespace dobudget
