#include "core/fit.hpp"

#include <cmath>
#include <limits>

#include "core/forward_backward.hpp"
#include "core/sampling.hpp"

namespace dobudget {
namespace {

int max_horizon(const std::vector<DataView>& data) {
  int h = 1;
  for (const auto& v : data)
    if (v.data != nullptr) h = std::max(h, v.data->horizon);
  return h;
}

Vector observation_frequencies(const std::vector<DataView>& data, int O) {
  Vector f = Vector::Constant(O, 1e-3);
  for (const auto& v : data)
    for (int i = 0; i < v.count; ++i)
      for (int t = 0; t <= v.data->horizon; ++t) f(v.data->obs(i)[t]) += 1.0;
  return f / f.sum();
}

void initialise(Engine& rng, const Vector& freq, Pomdp& m, Matrix& decision) {
  const int Z = m.states;
  sample_dirichlet(rng, 1.0, Z, m.initial.data());
  for (auto& T : m.transitions)
    for (int z = 0; z < Z; ++z) sample_dirichlet(rng, 1.0, Z, T.row(z).data());
  Vector row(m.observations);
  for (int z = 0; z < Z; ++z) {
    sample_dirichlet(rng, 1.0, m.observations, row.data());
    m.emissions.row(z) = 0.5 * freq.transpose() + 0.5 * row.transpose();
  }
  for (int z = 0; z < decision.rows(); ++z) sample_dirichlet(rng, 1.0, m.actions, decision.row(z).data());
}

Pomdp empty_latent(const Pomdp& shape, int Z) {
  Pomdp m;
  m.states = Z;
  m.actions = shape.actions;
  m.observations = shape.observations;
  m.initial = Vector::Constant(Z, 1.0 / Z);
  m.transitions.assign(static_cast<std::size_t>(shape.actions), Matrix::Constant(Z, Z, 1.0 / Z));
  m.emissions = Matrix::Constant(Z, shape.observations, 1.0 / shape.observations);
  m.rewards = shape.rewards;
  m.horizon = shape.horizon;
  m.discount = shape.discount;
  return m;
}

// E-step over every view, into `counts`; returns the log-likelihood.
double expectation(ForwardBackward& fb, const std::vector<DataView>& data, ExpectedCounts& counts) {
  double ll = 0.0;
  for (const auto& v : data) ll += fb.accumulate(v, counts);
  return ll;
}

}  // namespace

double em_step(const std::vector<DataView>& data, double prior, Pomdp& model, Matrix& decision) {
  ForwardBackward fb(model.states, model.actions, model.observations, max_horizon(data));
  ExpectedCounts counts;
  counts.reset(model.states, model.actions, model.observations);
  fb.load(model, decision.size() > 0 ? &decision : nullptr);
  const double ll = expectation(fb, data, counts);
  maximise(counts, prior, model, decision.size() > 0 ? &decision : nullptr);
  return ll;
}

double log_likelihood(const std::vector<DataView>& data, const Pomdp& model, const Matrix& decision) {
  ForwardBackward fb(model.states, model.actions, model.observations, max_horizon(data));
  fb.load(model, decision.size() > 0 ? &decision : nullptr);
  double ll = 0.0;
  for (const auto& v : data) ll += fb.log_likelihood(v);
  return ll;
}

FitResult fit(const std::vector<DataView>& data, bool decision_rule, const FitSettings& s, const Pomdp& shape,
              Engine& rng) {
  const int Z = s.latent_states;
  const Vector freq = observation_frequencies(data, shape.observations);
  ForwardBackward fb(Z, shape.actions, shape.observations, max_horizon(data));
  ExpectedCounts counts;

  FitResult best;
  best.objective = -std::numeric_limits<double>::infinity();
  for (int r = 0; r < std::max(1, s.restarts); ++r) {
    Pomdp m = empty_latent(shape, Z);
    Matrix qA = decision_rule ? Matrix(Z, shape.actions) : Matrix();
    initialise(rng, freq, m, qA);
    Matrix* qAp = decision_rule ? &qA : nullptr;

    double prev = -std::numeric_limits<double>::infinity();
    double ll = 0.0, obj = 0.0;
    int it = 0;
    bool converged = false;
    while (true) {
      counts.reset(Z, shape.actions, shape.observations);
      fb.load(m, qAp);
      ll = expectation(fb, data, counts);  // likelihood of the current parameters
      obj = ll + log_prior(m, qAp, s.prior);
      if (it > 0 && obj - prev <= s.tolerance * std::abs(prev)) {
        converged = true;
        break;
      }
      if (it == s.max_iterations) break;
      prev = obj;
      maximise(counts, s.prior, m, qAp);
      ++it;
    }
    // (m, qA) are the parameters whose objective is `obj`.
    best.restart_objectives.push_back(obj);
    if (obj > best.objective) {
      best.model = std::move(m);
      best.decision = std::move(qA);
      best.loglik = ll;
      best.objective = obj;
      best.iterations = it;
      best.converged = converged;
      best.best_restart = r;
    }
  }
  return best;
}

}  // namespace dobudget
