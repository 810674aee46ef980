// Benchmark of the return_gap machinery at the reference size: 8 states, 3 actions,
// 6 observations, horizon 20, 500 belief points. Prints the planning time (median of runs) and
// the time of one return_gap evaluation (planning in a fitted model + evaluation).
// Build: cmake --build build --target bench_planner; run: build/bench_planner [runs]
#include <algorithm>
#include <boost/random/gamma_distribution.hpp>
#include <boost/random/uniform_01.hpp>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <vector>

#include "core/measures/plan_value.hpp"
#include "core/measures/planner.hpp"
#include "core/measures/return_gap.hpp"

using namespace dobudget;

namespace {

// The synthetic family of docs/design.md, "The synthetic family": p0 ~ Dirichlet(1), T rows ~ Dirichlet(concentration),
// E(s, .) = (1 - noise) onehot(s mod O) + noise Dirichlet(1), r ~ Uniform(0, 1).
Pomdp draw(int S, int A, int O, int H, double concentration, double noise, std::uint64_t seed) {
  Engine eng(seed);
  boost::random::uniform_01<double> U;
  auto dirichlet = [&](auto row, double c) {
    boost::random::gamma_distribution<double> G(c);
    double z = 0.0;
    for (Eigen::Index i = 0; i < row.size(); ++i) z += (row(i) = G(eng));
    row /= z;
  };
  Pomdp m;
  m.states = S;
  m.actions = A;
  m.observations = O;
  m.horizon = H;
  m.discount = 1.0;
  m.initial.resize(S);
  dirichlet(m.initial.transpose(), 1.0);
  m.transitions.assign(A, Matrix(S, S));
  for (auto& T : m.transitions)
    for (int s = 0; s < S; ++s) dirichlet(T.row(s), concentration);
  m.emissions.resize(S, O);
  for (int s = 0; s < S; ++s) {
    dirichlet(m.emissions.row(s), 1.0);
    m.emissions.row(s) *= noise;
    m.emissions(s, s % O) += 1.0 - noise;
  }
  m.rewards.resize(O);
  for (int o = 0; o < O; ++o) m.rewards(o) = U(eng);
  return m;
}

double ms_since(std::chrono::steady_clock::time_point t0) {
  return std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - t0).count();
}

double median(std::vector<double> v) {
  std::sort(v.begin(), v.end());
  const std::size_t n = v.size();
  return n % 2 ? v[n / 2] : 0.5 * (v[n / 2 - 1] + v[n / 2]);
}

}  // namespace

int main(int argc, char** argv) {
  const int runs = argc > 1 ? std::max(1, std::atoi(argv[1])) : 5;
  const Pomdp truth = draw(8, 3, 6, 20, 0.5, 0.3, 1);
  // A "fitted" model: the truth's rewards, horizon and discount, dynamics mixed with another draw.
  const Pomdp other = draw(8, 3, 6, 20, 0.5, 0.3, 2);
  Pomdp fitted = truth;
  for (int a = 0; a < truth.actions; ++a) fitted.transitions[a] = 0.7 * truth.transitions[a] + 0.3 * other.transitions[a];
  fitted.emissions = 0.7 * truth.emissions + 0.3 * other.emissions;

  PlannerSettings ps;  // 500 belief points, 2000 rollouts, exact up to 20000 histories
  const StreamKey key{1, 0, 0, 0};

  std::vector<double> plan_ms, gap_ms;
  Plan p;
  for (int r = 0; r < runs; ++r) {
    const auto t0 = std::chrono::steady_clock::now();
    p = plan(truth, ps, key);
    plan_ms.push_back(ms_since(t0));
  }
  std::size_t alphas = 0, points = 0;
  for (int t = 0; t < p.horizon; ++t) {
    alphas += static_cast<std::size_t>(p.alpha[t].rows());
    points += static_cast<std::size_t>(p.belief_points[t]);
  }

  auto t0 = std::chrono::steady_clock::now();
  const ReturnGapReference ref = prepare_return_gap(truth, ps, key);
  const double prep_ms = ms_since(t0);
  ReturnGapResult g;
  for (int r = 0; r < runs; ++r) {
    StreamKey rk = key;
    rk.replicate = 1;
    t0 = std::chrono::steady_clock::now();
    g = return_gap(truth, fitted, ref, ps, rk);
    gap_ms.push_back(ms_since(t0));
  }

  std::printf("reference size: S=%d A=%d O=%d H=%d, belief_points=%d, rollouts=%d\n", truth.states, truth.actions,
              truth.observations, truth.horizon, ps.belief_points, ps.rollouts);
  std::printf("plan: median %.1f ms over %d runs (min %.1f, max %.1f); %zu belief points, %zu alpha vectors in all stages\n",
              median(plan_ms), runs, *std::min_element(plan_ms.begin(), plan_ms.end()),
              *std::max_element(plan_ms.begin(), plan_ms.end()), points, alphas);
  std::printf("prepare_return_gap (plan in truth + V* + V_uniform): %.1f ms; V* = %.4f (se %.4f, %s), V_uniform = %.4f\n",
              prep_ms, ref.v_star, ref.v_star_se, ref.v_star_exact ? "exact" : "rollouts", ref.v_uniform);
  std::printf("return_gap (plan in fitted + evaluation): median %.1f ms over %d runs; gap = %.4f (se %.4f, %s)\n",
              median(gap_ms), runs, g.gap ? *g.gap : -1.0, g.gap_se, g.exact ? "exact" : "rollouts");
  return 0;
}
