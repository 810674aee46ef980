#include "core/world/pomdp.hpp"

#include <cmath>
#include <sstream>

namespace dobudget {
namespace {

std::string check_rows(const Matrix& m, int rows, int cols, const std::string& what, double tol) {
  std::ostringstream os;
  if (m.rows() != rows || m.cols() != cols) {
    os << what << " is " << m.rows() << " x " << m.cols() << ", expected " << rows << " x " << cols;
    return os.str();
  }
  for (int i = 0; i < rows; ++i) {
    for (int j = 0; j < cols; ++j) {
      if (!(m(i, j) >= 0.0) || !std::isfinite(m(i, j))) {
        os << what << " row " << i << " column " << j << " is " << m(i, j) << " (must be a probability)";
        return os.str();
      }
    }
    const double s = m.row(i).sum();
    if (std::abs(s - 1.0) > tol) {
      os.precision(17);
      os << what << " row " << i << " sums to " << s << ", not 1 (tolerance " << tol << ")";
      return os.str();
    }
  }
  return {};
}

}  // namespace

std::string validate(const Pomdp& m, double tol) {
  std::ostringstream os;
  if (m.states < 1 || m.actions < 1 || m.observations < 1) return "states, actions and observations must each be at least 1";
  if (m.horizon < 1) return "horizon must be at least 1";
  if (!(m.discount > 0.0 && m.discount <= 1.0)) return "discount must be in (0, 1]";
  Matrix init = m.initial.transpose();
  if (auto e = check_rows(init, 1, m.states, "initial", tol); !e.empty()) return e;
  if (static_cast<int>(m.transitions.size()) != m.actions) {
    os << "transitions has " << m.transitions.size() << " matrices, expected one per action (" << m.actions << ")";
    return os.str();
  }
  for (int a = 0; a < m.actions; ++a)
    if (auto e = check_rows(m.transitions[a], m.states, m.states, "transitions[" + std::to_string(a) + "]", tol); !e.empty())
      return e;
  if (auto e = check_rows(m.emissions, m.states, m.observations, "emissions", tol); !e.empty()) return e;
  if (m.rewards.size() != m.observations) {
    os << "rewards has " << m.rewards.size() << " entries, expected one per observation (" << m.observations << ")";
    return os.str();
  }
  for (int o = 0; o < m.observations; ++o)
    if (!std::isfinite(m.rewards(o))) return "rewards[" + std::to_string(o) + "] is not finite";
  return {};
}

std::string validate(const Environment& e, double tol) {
  if (auto s = validate(e.model, tol); !s.empty()) return s;
  return check_rows(e.logging_policy, e.model.states, e.model.actions, "logging_policy", tol);
}

}  // namespace dobudget
