// Learning curve e(n) = c + a n^(-b) fitted by weighted nonlinear least squares (docs/design.md, "Needed pilot episodes").
//
// Objective: minimise  RSS(c, a, b) = sum_i w_i (y_i - c - a n_i^(-b))^2
// subject to a >= 0 (the error does not grow with more data), b in [b_min, b_max] (default
// [0.01, 3]) and, by default, c >= 0.
//
// Method: variable projection (Golub and Pereyra, "The differentiation of pseudo-inverses and
// nonlinear least squares problems whose variables separate", SIAM J. Numer. Anal. 10(2), 1973).
// For fixed b the model is linear in (c, a) with regressors (1, x_i = n_i^(-b)), so the best
// (c, a) solve a two-parameter weighted least-squares problem in closed form:
//   a = sum w (x - xbar)(y - ybar) / sum w (x - xbar)^2,   c = ybar - a xbar   (weighted means).
// The bound constraints make it a two-variable convex quadratic programme; its optimum is the
// best feasible one among the unconstrained solution and the solutions with a = 0 and/or c = 0
// active (enumeration of active sets). What is left is the one-dimensional profile RSS*(b),
// minimised by a coarse scan over b (it can have several local minima) followed by Brent's
// method (Brent, "Algorithms for Minimization without Derivatives", 1973, ch. 5; Boost.Math
// brent_find_minima) inside the bracket around the best scan point. The fit is deterministic
// and allocates nothing.
//
// Why c >= 0 by default: both measures are non-negative in the population (a KL divergence;
// a return gap against the optimum), the target epsilon is positive, and the bound removes the
// unidentifiable escape b -> 0, c -> -infinity (n^-b ~ 1 - b log n makes a slow log-linear decline
// look like a curve with an arbitrarily negative floor). A floor estimated at exactly 0 is still
// "reachable" for every positive target. Set nonnegative_floor = false for a free c.
//
// Weights: w_i = 1 / max(s_i, s_floor) with s_i = var_i / m_i, the squared standard error of the
// fitted statistic at budget i (the replicate variance over the replicate count). For a quantile of
// a location-scale family the sampling variance is kappa(beta) sigma^2 / m with kappa the same at
// every budget, so the same weights are proportional to the inverse variance of a quantile too.
// The floor s_floor = 1e-6 * max_i s_i keeps one near-deterministic budget from taking all the
// weight; a budget with fewer than two replicates gets the largest s_i (the smallest weight); when
// every s_i is 0 (exact data) all weights are 1.
#pragma once
#include <optional>
#include <span>

namespace dobudget {

struct LearningCurveOptions {
  double b_min = 0.01;
  double b_max = 3.0;
  int scan_points = 60;           // coarse scan of the profile RSS*(b), geometric in b
  bool nonnegative_floor = true;  // c >= 0 (see above); false: c free
};

struct LearningCurve {
  double c = 0.0;  // floor: the limit of e(n) as n -> infinity
  double a = 0.0;
  double b = 0.0;
  double rss = 0.0;  // weighted residual sum of squares at the optimum

  double operator()(double n) const;
  // The budget n with e(n) = epsilon: n = (a / (epsilon - c))^(1/b). Empty when the curve never
  // reaches epsilon (c >= epsilon, or a flat curve a == 0 above epsilon). When the curve is
  // already at or below epsilon everywhere (a == 0, c <= epsilon) the answer is 0.
  std::optional<double> solve(double epsilon) const;
};

// Fits the curve to points (n_i, y_i) with weights w_i. Points with n_i <= 0 or w_i <= 0 are
// ignored. Empty when fewer than three distinct budgets remain (three parameters).
std::optional<LearningCurve> fit_learning_curve(std::span<const double> n, std::span<const double> y,
                                                std::span<const double> w, const LearningCurveOptions& opt = {});

// Inverse-variance weights as described above: w_i = 1 / max(var_i / m_i, s_floor).
// var_i is ignored when m_i < 2. out.size() == var.size() == m.size().
void inverse_variance_weights(std::span<const double> var, std::span<const double> m, std::span<double> out);

}  // namespace dobudget
