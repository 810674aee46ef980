// A finite partially observable Markov decision process (docs/design.md, "Environments"). The same type holds
// a true environment (hidden states S) and a fitted latent model (latent values Z): the
// planner, the belief filter and model_kl work on either.
#pragma once
#include <Eigen/Core>
#include <string>
#include <vector>

namespace dobudget {

using Matrix = Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>;
using Vector = Eigen::VectorXd;

struct Pomdp {
  int states = 0;                   // |S| (or |Z| for a fitted model)
  int actions = 0;                  // |A|
  int observations = 0;             // |O|
  Vector initial;                   // p0(s), size S
  std::vector<Matrix> transitions;  // T[a](s, s'), A matrices S x S, rows sum to 1
  Matrix emissions;                 // E(s, o), S x O, rows sum to 1
  Vector rewards;                   // r(o), size O
  int horizon = 1;                  // H, decisions per episode
  double discount = 1.0;            // gamma
};

// An environment is a POMDP plus the privileged decision rule of the logged regime.
struct Environment {
  Pomdp model;
  Matrix logging_policy;  // pi_log(a | s), S x A, rows sum to 1
};

// Returns an empty string when every size agrees and every distribution is a probability
// vector within `tolerance`; otherwise a message naming the first offending part
// (e.g. "transitions[1] row 2 sums to 0.9").
std::string validate(const Pomdp& m, double tolerance = 1e-9);
std::string validate(const Environment& e, double tolerance = 1e-9);

}  // namespace dobudget
