// Value of a plan executed in the truth while tracking beliefs in another model; see plan_value.hpp.
#include "core/measures/plan_value.hpp"

#include <algorithm>
#include <boost/random/uniform_01.hpp>
#include <cmath>
#include <stdexcept>
#include <string>

#include "core/measures/belief.hpp"
#include "core/world/sampling.hpp"

namespace dobudget {
namespace {


// b <- (b as predicted) | o in the belief model; if the model gives o probability 0, b keeps the
// prediction (copied back from `pred`).
void track(const Pomdp& bm, const double* pred, int o, double* b) {
  const int Z = bm.states;
  std::copy(pred, pred + Z, b);
  if (condition(bm, b, o) <= 0.0) std::copy(pred, pred + Z, b);
}

// Depth-first enumeration of the observation branches under the plan (see header).
class ExactWalk {
 public:
  ExactWalk(const Pomdp& truth, const Pomdp& bm, const Plan& plan, long long max_histories, const StopToken& stop)
      : truth_(truth), bm_(bm), plan_(plan), stop_(stop), max_(max_histories), S_(truth.states), Z_(bm.states),
        O_(truth.observations), H_(truth.horizon) {
    q_.resize(static_cast<std::size_t>(H_ + 1) * S_);
    qp_.resize(static_cast<std::size_t>(H_) * S_);
    b_.resize(static_cast<std::size_t>(H_ + 1) * Z_);
    bp_.resize(static_cast<std::size_t>(H_) * Z_);
    disc_.resize(static_cast<std::size_t>(H_));
    double g = 1.0;
    for (int t = 0; t < H_; ++t, g *= truth.discount) disc_[t] = g;
  }

  // Returns the exact value, or nullopt on more than max_ histories.
  std::optional<double> run() {
    double v = 0.0;
    double* q = q_.data();
    double* b = b_.data();
    for (int o = 0; o < O_; ++o) {
      double mass = 0.0;
      for (int s = 0; s < S_; ++s) {
        q[s] = truth_.initial(s) * truth_.emissions(s, o);
        mass += q[s];
      }
      if (mass <= 0.0) continue;
      track(bm_, bm_.initial.data(), o, b);
      v += walk(0);
      if (overflow_) return std::nullopt;
    }
    return v;
  }

  long long histories() const { return count_; }

 private:
  // Contribution of decisions t..H-1 (absolute discounting) below the node at depth t.
  double walk(int t) {
    if (t == H_) {
      if (++count_ > max_) overflow_ = true;
      if (count_ % 4096 == 0) stop_.poll();
      return 0.0;
    }
    const double* q = q_.data() + static_cast<std::ptrdiff_t>(t) * S_;
    const double* b = b_.data() + static_cast<std::ptrdiff_t>(t) * Z_;
    double* qp = qp_.data() + static_cast<std::ptrdiff_t>(t) * S_;
    double* bp = bp_.data() + static_cast<std::ptrdiff_t>(t) * Z_;
    double* qn = q_.data() + static_cast<std::ptrdiff_t>(t + 1) * S_;
    double* bn = b_.data() + static_cast<std::ptrdiff_t>(t + 1) * Z_;
    const int a = choose_action(plan_, t, b);
    predict(truth_, q, a, qp);
    predict(bm_, b, a, bp);
    double v = 0.0;
    for (int o = 0; o < O_; ++o) {
      double mass = 0.0;
      for (int s = 0; s < S_; ++s) {
        qn[s] = qp[s] * truth_.emissions(s, o);
        mass += qn[s];
      }
      if (mass <= 0.0) continue;
      v += disc_[t] * mass * truth_.rewards(o);
      track(bm_, bp, o, bn);
      v += walk(t + 1);
      if (overflow_) return 0.0;
    }
    return v;
  }

  const Pomdp& truth_;
  const Pomdp& bm_;
  const Plan& plan_;
  const StopToken& stop_;
  long long max_;
  int S_, Z_, O_, H_;
  std::vector<double> q_, qp_, b_, bp_, disc_;
  long long count_ = 0;
  bool overflow_ = false;
};

// m_0 * m^H, a lower bound on the number of reachable histories under any plan (see header).
double histories_lower_bound(const Pomdp& m) {
  std::vector<double> po(static_cast<std::size_t>(m.observations));
  observation_distribution(m, m.initial.data(), po.data());
  const double m0 = static_cast<double>(std::count_if(po.begin(), po.end(), [](double x) { return x > 0.0; }));
  int least = m.observations;
  for (int a = 0; a < m.actions; ++a) {
    const Matrix TE = m.transitions[a] * m.emissions;
    for (int s = 0; s < m.states; ++s)
      least = std::min(least, static_cast<int>((TE.row(s).array() > 0.0).count()));
  }
  return m0 * std::pow(static_cast<double>(least), m.horizon);
}

// CRN rollouts of the plan (plan != nullptr) or of the uniform policy (plan == nullptr).
PolicyValue rollouts(const Pomdp& truth, const Pomdp* bm, const Plan* plan, int n, const StreamKey& key,
                     std::vector<double>* returns, const StopToken& stop) {
  if (n < 2) throw std::invalid_argument("rollouts: need at least 2 rollouts for a standard error");
  const int S = truth.states, A = truth.actions, O = truth.observations, H = truth.horizon;
  const int Z = bm ? bm->states : 0;
  std::vector<double> local;
  std::vector<double>& ret = returns ? *returns : local;
  ret.assign(static_cast<std::size_t>(n), 0.0);
  std::vector<double> b(static_cast<std::size_t>(Z)), bp(static_cast<std::size_t>(Z));
  Engine eng = make_engine(key, Purpose::rollout);
  boost::random::uniform_01<double> U;
  for (int i = 0; i < n; ++i) {
    if (i % 16 == 0) stop.poll();
    const double u_s0 = U(eng), u_o0 = U(eng);
    int s = categorical_from_uniform(u_s0, truth.initial.data(), S);
    int o = categorical_from_uniform(u_o0, truth.emissions.data() + static_cast<std::ptrdiff_t>(s) * O, O);
    if (plan) track(*bm, bm->initial.data(), o, b.data());
    double g = 1.0, total = 0.0;
    for (int t = 0; t < H; ++t) {
      const double u_a = U(eng), u_s = U(eng), u_o = U(eng);
      const int a = plan ? choose_action(*plan, t, b.data()) : std::min(A - 1, static_cast<int>(u_a * A));
      s = categorical_from_uniform(u_s, truth.transitions[a].data() + static_cast<std::ptrdiff_t>(s) * S, S);
      o = categorical_from_uniform(u_o, truth.emissions.data() + static_cast<std::ptrdiff_t>(s) * O, O);
      total += g * truth.rewards(o);
      g *= truth.discount;
      if (plan && t + 1 < H) {
        predict(*bm, b.data(), a, bp.data());
        track(*bm, bp.data(), o, b.data());
      }
    }
    ret[i] = total;
  }
  double mean = 0.0;
  for (double x : ret) mean += x;
  mean /= n;
  double ss = 0.0;
  for (double x : ret) ss += (x - mean) * (x - mean);
  PolicyValue v;
  v.mean = mean;
  v.standard_error = std::sqrt(ss / (n - 1) / n);
  v.exact = false;
  v.histories = n;
  return v;
}

}  // namespace

void check_compatible(const Pomdp& truth, const Pomdp& bm, const Plan& plan) {
  if (truth.actions != bm.actions || truth.observations != bm.observations)
    throw std::invalid_argument("plan value: the belief model must share the truth's actions and observations");
  if (plan.states != bm.states)
    throw std::invalid_argument("plan value: the plan reads beliefs of " + std::to_string(plan.states) +
                                " states, the belief model has " + std::to_string(bm.states));
  if (plan.horizon < truth.horizon)
    throw std::invalid_argument("plan value: the plan covers " + std::to_string(plan.horizon) +
                                " stages, the truth's horizon is " + std::to_string(truth.horizon));
}

std::optional<PolicyValue> exact_plan_value(const Pomdp& truth, const Pomdp& bm, const Plan& plan,
                                            long long max_histories, const StopToken& stop) {
  check_compatible(truth, bm, plan);
  if (max_histories < 1 || histories_lower_bound(truth) > static_cast<double>(max_histories)) return std::nullopt;
  ExactWalk walk(truth, bm, plan, max_histories, stop);
  const std::optional<double> v = walk.run();
  if (!v) return std::nullopt;
  PolicyValue out;
  out.mean = *v;
  out.exact = true;
  out.histories = walk.histories();
  return out;
}

PolicyValue rollout_plan_value(const Pomdp& truth, const Pomdp& bm, const Plan& plan, int n, const StreamKey& key,
                               std::vector<double>* returns, const StopToken& stop) {
  check_compatible(truth, bm, plan);
  return rollouts(truth, &bm, &plan, n, key, returns, stop);
}

PolicyValue plan_value(const Pomdp& truth, const Pomdp& bm, const Plan& plan, const PlannerSettings& settings,
                       const StreamKey& key, const StopToken& stop) {
  if (auto v = exact_plan_value(truth, bm, plan, settings.exact_histories, stop)) return *v;
  return rollout_plan_value(truth, bm, plan, settings.rollouts, key, nullptr, stop);
}

double exact_uniform_value(const Pomdp& truth) {
  const int S = truth.states;
  Matrix Tbar = Matrix::Zero(S, S);
  for (const Matrix& T : truth.transitions) Tbar += T;
  Tbar /= static_cast<double>(truth.actions);
  const Vector er = truth.emissions * truth.rewards;  // expected reward on arriving in s'
  Eigen::RowVectorXd d = truth.initial.transpose();
  double v = 0.0, g = 1.0;
  for (int t = 0; t < truth.horizon; ++t, g *= truth.discount) {
    d = d * Tbar;
    v += g * d.dot(er.transpose());
  }
  return v;
}

PolicyValue rollout_uniform_value(const Pomdp& truth, int n, const StreamKey& key, std::vector<double>* returns) {
  return rollouts(truth, nullptr, nullptr, n, key, returns, StopToken{});
}

}  // namespace dobudget
