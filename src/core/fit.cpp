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

namespace {

// One EM run from (m, qA) for at most `budget` further iterations (stops early when the relative
// objective change falls below the tolerance). Returns the final state.
struct Run {
  Pomdp m;
  Matrix qA;
  double ll = 0.0, obj = -std::numeric_limits<double>::infinity(), prev = -std::numeric_limits<double>::infinity();
  int iterations = 0;
  bool converged = false;
};

void iterate(Run& run, int budget, ForwardBackward& fb, ExpectedCounts& counts, const std::vector<DataView>& data,
             const FitSettings& s) {
  Matrix* qAp = run.qA.size() > 0 ? &run.qA : nullptr;
  const int stop_at = std::min(s.max_iterations, run.iterations + budget);
  while (!run.converged) {
    counts.reset(run.m.states, run.m.actions, run.m.observations);
    fb.load(run.m, qAp);
    run.ll = expectation(fb, data, counts);  // likelihood of the current parameters
    run.obj = run.ll + log_prior(run.m, qAp, s.prior);
    if (run.iterations > 0 && run.obj - run.prev <= s.tolerance * std::abs(run.prev)) {
      run.converged = true;
      break;
    }
    if (run.iterations >= stop_at) break;
    run.prev = run.obj;
    maximise(counts, s.prior, run.m, qAp);
    ++run.iterations;
  }
}

}  // namespace

FitResult fit(const std::vector<DataView>& data, bool decision_rule, const FitSettings& s, const Pomdp& shape,
              Engine& rng) {
  const int Z = s.latent_states;
  const Vector freq = observation_frequencies(data, shape.observations);
  ForwardBackward fb(Z, shape.actions, shape.observations, max_horizon(data));
  ExpectedCounts counts;

  // Screening: every random start runs `screening_iterations` EM steps ("small EM", Biernacki,
  // Celeux and Govaert, Comput. Stat. Data Anal. 41, 2003, sec. 3.2).
  // screening_iterations = 0 turns screening off: every start runs to convergence.
  const bool screen = s.screening_iterations > 0;
  std::vector<Run> runs(static_cast<std::size_t>(std::max(1, s.restarts)));
  for (auto& run : runs) {
    run.m = empty_latent(shape, Z);
    run.qA = decision_rule ? Matrix(Z, shape.actions) : Matrix();
    initialise(rng, freq, run.m, run.qA);
    iterate(run, screen ? s.screening_iterations : s.max_iterations, fb, counts, data, s);
  }
  // The `finalists` best screened runs continue to convergence; the best final objective wins.
  std::vector<std::size_t> order(runs.size());
  for (std::size_t i = 0; i < order.size(); ++i) order[i] = i;
  std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) { return runs[a].obj > runs[b].obj; });
  const std::size_t finalists =
      screen ? std::min<std::size_t>(runs.size(), static_cast<std::size_t>(std::max(1, s.finalists))) : runs.size();
  FitResult best;
  best.objective = -std::numeric_limits<double>::infinity();
  for (std::size_t k = 0; k < finalists; ++k) {
    Run& run = runs[order[k]];
    iterate(run, s.max_iterations, fb, counts, data, s);
    if (run.obj > best.objective) {
      best.objective = run.obj;
      best.loglik = run.ll;
      best.iterations = run.iterations;
      best.converged = run.converged;
      best.best_restart = static_cast<int>(order[k]);
    }
  }
  for (const auto& run : runs) best.restart_objectives.push_back(run.obj);
  Run& win = runs[static_cast<std::size_t>(best.best_restart)];
  best.model = std::move(win.m);
  best.decision = std::move(win.qA);
  return best;
}

}  // namespace dobudget
