#include "core/world/logging_policy.hpp"

#include <cmath>

namespace dobudget {

Matrix optimal_state_action_values(const Pomdp& m, double q_discount) {
  const Vector R = m.emissions * m.rewards;  // R(s') = sum_o E(s', o) r(o)
  Matrix Q = Matrix::Zero(m.states, m.actions);
  Vector V = Vector::Zero(m.states);
  for (int it = 0; it < 100000; ++it) {
    for (int a = 0; a < m.actions; ++a) Q.col(a) = m.transitions[static_cast<std::size_t>(a)] * (R + q_discount * V);
    const Vector Vn = Q.rowwise().maxCoeff();
    const double diff = (Vn - V).cwiseAbs().maxCoeff();
    V = Vn;
    if (diff < 1e-12) break;
  }
  return Q;
}

Matrix privileged_logging_policy(const Pomdp& m, const LoggingSettings& logging) {
  const Matrix Q = optimal_state_action_values(m, logging.q_discount);
  Matrix pi(m.states, m.actions);
  for (int s = 0; s < m.states; ++s) {
    const double qmax = Q.row(s).maxCoeff();  // shift for a stable softmax
    double z = 0.0;
    for (int a = 0; a < m.actions; ++a) z += (pi(s, a) = std::exp((Q(s, a) - qmax) / logging.temperature));
    for (int a = 0; a < m.actions; ++a)
      pi(s, a) = logging.privilege * pi(s, a) / z + (1.0 - logging.privilege) / m.actions;
  }
  return pi;
}

}  // namespace dobudget
