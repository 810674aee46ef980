#include "core/fitting/fit.hpp"

#include <algorithm>
#include <cmath>
#include <limits>

#include "core/fitting/collapse.hpp"
#include "core/fitting/forward_backward.hpp"

namespace dobudget {
namespace {

// Stopping: no probability moved by more than this over the last SQUAREM cycle (with the
// objective's change per observation at most FitSettings::tolerance).
constexpr double kParameterTolerance = 1e-3;
// Latent values closer than this (collapse.hpp) are split, at most kMaxEscapes times per start.
constexpr double kCollapseDistance = 0.02;
constexpr int kMaxEscapes = 2;
// Two starts reach the same optimum when their objectives differ by at most this per observation
// (a tenth of the 1 nat per 1000 observations counted as a failed fit in DEVELOPERS.md).
constexpr double kConfirmTolerance = 1e-4;

int max_horizon(const std::vector<DataView>& data) {
  int h = 1;
  for (const auto& v : data)
    if (v.data != nullptr) h = std::max(h, v.data->horizon);
  return h;
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

// Parameters as one flat vector of probability rows: q0 | qT[0] | ... | qT[A-1] | qE | qA
// (row-major matrices, so each block is contiguous).
struct Params {
  Pomdp m;
  Matrix qA;
};

void pack(const Params& p, std::vector<double>& x) {
  x.clear();
  x.insert(x.end(), p.m.initial.data(), p.m.initial.data() + p.m.initial.size());
  for (const auto& T : p.m.transitions) x.insert(x.end(), T.data(), T.data() + T.size());
  x.insert(x.end(), p.m.emissions.data(), p.m.emissions.data() + p.m.emissions.size());
  x.insert(x.end(), p.qA.data(), p.qA.data() + p.qA.size());
}

// Writes x back into p and renormalises every row (extrapolation keeps row sums at 1 only up to
// rounding).
void unpack(const std::vector<double>& x, Params& p) {
  const double* src = x.data();
  auto take = [&src](double* dst, Eigen::Index rows, Eigen::Index cols) {
    for (Eigen::Index i = 0; i < rows; ++i) {
      double sum = 0.0;
      for (Eigen::Index j = 0; j < cols; ++j) sum += src[j];
      for (Eigen::Index j = 0; j < cols; ++j) dst[j] = src[j] / sum;
      src += cols;
      dst += cols;
    }
  };
  take(p.m.initial.data(), 1, p.m.initial.size());
  for (auto& T : p.m.transitions) take(T.data(), T.rows(), T.cols());
  take(p.m.emissions.data(), p.m.emissions.rows(), p.m.emissions.cols());
  take(p.qA.data(), p.qA.rows(), p.qA.cols());
}

// One EM run accelerated by SQUAREM (Varadhan and Roland, "Simple and globally convergent methods
// for accelerating the convergence of any EM algorithm", Scand. J. Stat. 35, 2008, scheme S3):
// from theta0, two EM steps give theta1 = F(theta0), theta2 = F(theta1); with r = theta1 - theta0,
// v = theta2 - theta1 - r and alpha = -|r| / |v| (at most -1), the extrapolated point is
//   theta' = theta0 - 2 alpha r + alpha^2 v,
// with alpha moved halfway towards -1 until theta' is a set of probability rows (alpha = -1 gives
// theta2). theta' is kept only if its objective is at least that of theta1, otherwise theta2 is
// taken: the objective never decreases. Plain EM stalls along directions that only the pilot
// episodes inform, and a relative stopping rule then stops it early (tests/core/fitting/test_confounding);
// the extrapolation moves along exactly those directions.
// Iterations count E-steps. Convergence (a rule that does not loosen as the data grow): one cycle
// improves the objective by at most tolerance per observation of the data, and moves no
// probability by more than kParameterTolerance.
struct Run {
  Params p;
  double ll = 0.0, obj = -std::numeric_limits<double>::infinity();
  int iterations = 0;
  bool converged = false;
};

class Accelerated {
 public:
  Accelerated(ForwardBackward& fb, const std::vector<DataView>& data, const FitSettings& s, double observations,
              const StopToken& stop)
      : fb_(fb), data_(data), s_(s), objective_tolerance_(s.tolerance * observations), stop_(stop) {}

  // Runs EM from run.p until convergence or until run.iterations reaches `cap`.
  void run(Run& run, int cap) {
    Params& p0 = run.p;
    run.converged = false;
    run.obj = -std::numeric_limits<double>::infinity();
    evaluate(p0, c0_, run);
    while (!run.converged && run.iterations < cap) {
      Params p1 = p0;
      step(c0_, p1);
      Run r1;
      evaluate(p1, c1_, r1);
      ++run.iterations;
      pack(p0, x0_);
      pack(p1, x1_);
      if (run.iterations >= cap) {  // no room for a whole cycle: keep the plain EM step
        accept(run, p1, c1_, r1, x1_);
        break;
      }
      Params p2 = p1;
      step(c1_, p2);
      pack(p2, x2_);
      double rr = 0.0, vv = 0.0;
      const std::size_t n = x0_.size();
      r_.resize(n);
      v_.resize(n);
      for (std::size_t k = 0; k < n; ++k) {
        r_[k] = x1_[k] - x0_[k];
        v_[k] = x2_[k] - x1_[k] - r_[k];
        rr += r_[k] * r_[k];
        vv += v_[k] * v_[k];
      }
      double alpha = vv > 0.0 ? -std::sqrt(rr / vv) : -1.0;
      Params next = p2;
      while (alpha < -1.0) {
        bool valid = true;
        xn_.resize(n);
        for (std::size_t k = 0; k < n && valid; ++k) {
          xn_[k] = x0_[k] - 2.0 * alpha * r_[k] + alpha * alpha * v_[k];
          valid = xn_[k] >= 0.0;
        }
        if (valid) {
          unpack(xn_, next);
          break;
        }
        alpha = 0.5 * (alpha - 1.0);
        if (alpha > -1.01) alpha = -1.0;
      }
      Run rn;
      evaluate(next, cn_, rn);
      ++run.iterations;
      if (alpha < -1.0 && !(rn.obj >= r1.obj)) {  // extrapolation did worse than one EM step
        if (run.iterations >= cap) {
          accept(run, p1, c1_, r1, x1_);
          break;
        }
        next = std::move(p2);  // theta2, whose objective is at least theta1's
        evaluate(next, cn_, rn);
        ++run.iterations;
      }
      pack(next, xn_);
      accept(run, next, cn_, rn, xn_);
    }
  }

 private:
  // Makes `p` (evaluated into `c`, `r`; packed as `x`) the current point of `run`, whose packed
  // parameters are x0_.
  void accept(Run& run, Params& p, ExpectedCounts& c, const Run& r, const std::vector<double>& x) {
    double moved = 0.0;
    for (std::size_t k = 0; k < x.size(); ++k) moved = std::max(moved, std::abs(x[k] - x0_[k]));
    run.converged = r.obj - run.obj <= objective_tolerance_ && moved <= kParameterTolerance;
    run.p = std::move(p);
    std::swap(c0_, c);
    run.ll = r.ll;
    run.obj = r.obj;
  }
  void evaluate(const Params& p, ExpectedCounts& c, Run& out) {
    stop_.poll();  // between E-steps: the only long computation of a fit
    const Matrix* qAp = p.qA.size() > 0 ? &p.qA : nullptr;
    c.reset(p.m.states, p.m.actions, p.m.observations);
    fb_.load(p.m, qAp);
    out.ll = expectation(fb_, data_, c);
    out.obj = out.ll + log_prior(p.m, qAp, s_.prior);
  }
  void step(const ExpectedCounts& c, Params& p) { maximise(c, s_.prior, p.m, p.qA.size() > 0 ? &p.qA : nullptr); }

  ForwardBackward& fb_;
  const std::vector<DataView>& data_;
  const FitSettings& s_;
  const double objective_tolerance_;
  const StopToken& stop_;
  ExpectedCounts c0_, c1_, cn_;
  std::vector<double> x0_, x1_, x2_, r_, v_, xn_;
};

}  // namespace

FitResult fit(const std::vector<DataView>& data, bool decision_rule, const FitSettings& s, const Pomdp& shape,
              Engine& rng, const std::vector<WarmStart>& warm, const StopToken& stop) {
  const int Z = s.latent_states;
  double observations = 0.0;
  for (const auto& v : data)
    if (v.data != nullptr) observations += v.data->observations_in(v.count);
  const Vector freq = observation_frequencies(data, shape.observations);
  const Vector action_freq = logged_action_frequencies(data, shape.actions);
  ForwardBackward fb(Z, shape.actions, shape.observations, max_horizon(data));
  Accelerated em(fb, data, s, observations, stop);
  const double confirm = kConfirmTolerance * std::max(1.0, observations);
  const int n_warm = static_cast<int>(warm.size());
  const int least = std::max(std::max(1, s.restarts), n_warm + 1);  // at least one random start
  const int most = std::max(least, s.max_restarts);
  FitResult best;
  best.objective = -std::numeric_limits<double>::infinity();
  auto confirmed = [&] {
    int reached = 0;
    for (double o : best.restart_objectives) reached += o >= best.objective - confirm;
    return reached >= 2;
  };
  for (int k = 0; k < most && !(k >= least && confirmed()); ++k) {
    Run run;
    run.p.m = empty_latent(shape, Z);
    run.p.qA = decision_rule ? Matrix(Z, shape.actions) : Matrix();
    if (k < n_warm) warm_start(warm[static_cast<std::size_t>(k)], action_freq, run.p.m, run.p.qA);
    else random_start(rng, data, freq, run.p.m, run.p.qA);
    em.run(run, s.max_iterations);
    // Escape collapsed latent values: split the closest pair and continue; keep the split's end
    // only if it is better (collapse.hpp).
    for (int e = 0; e < kMaxEscapes; ++e) {
      const auto pair = collapsed_pair(run.p.m, run.p.qA, kCollapseDistance);
      if (!pair) break;
      Run trial;
      trial.p = run.p;
      trial.iterations = run.iterations;
      split_latent_pair(rng, pair->first, pair->second, trial.p.m, trial.p.qA);
      em.run(trial, run.iterations + s.max_iterations);
      ++best.escapes;
      if (!(trial.obj > run.obj)) {
        run.iterations = trial.iterations;
        break;
      }
      run = std::move(trial);
    }
    best.restart_objectives.push_back(run.obj);
    best.total_iterations += run.iterations;
    if (run.obj > best.objective) {
      best.objective = run.obj;
      best.loglik = run.ll;
      best.iterations = run.iterations;
      best.converged = run.converged;
      best.best_restart = k;
      best.model = std::move(run.p.m);
      best.decision = std::move(run.p.qA);
    }
  }
  best.starts = static_cast<int>(best.restart_objectives.size());
  best.confirmed = confirmed();
  return best;
}

}  // namespace dobudget
