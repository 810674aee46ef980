#include "core/running/cost_estimate.hpp"

#include <algorithm>
#include <chrono>
#include <map>

#include "core/world/dataset.hpp"
#include "core/fitting/fit.hpp"
#include "core/measures/model_kl.hpp"
#include "core/measures/return_gap.hpp"
#include "core/running/scenario_sizes.hpp"
#include "core/world/synthetic.hpp"
#include "core/running/unit.hpp"

namespace dobudget {
namespace {

double seconds_since(std::chrono::steady_clock::time_point t0) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
}

}  // namespace

// The fits of fits_per_unit (unit.hpp), each seeing (pilot + logged) x (H + 1) observations, summed
// in closed form (P the pilot budgets, L+ the logged budgets above 0, k the listed strategies other
// than pilot-only):
//   observations / (H + 1) = [pilot-only fit] x sum(P) + k x (|L+| x sum(P) + |P| x sum(L+)).
double observations_per_unit(const ScenarioSettings& s) {
  double pilot_sum = 0.0, logged_sum = 0.0, logged_count = 0.0, k = 0.0;
  for (int n : s.pilot_budgets) pilot_sum += n;
  for (int L : s.logged_budgets)
    if (L > 0) {
      logged_sum += L;
      logged_count += 1.0;
    }
  for (Strategy st : s.strategies)
    if (st != Strategy::pilot_only) k += 1.0;
  const bool pilot_only_fit = k < static_cast<double>(s.strategies.size()) ||
                              logged_count < static_cast<double>(s.logged_budgets.size());
  const double pilots = static_cast<double>(s.pilot_budgets.size());
  return ((pilot_only_fit ? pilot_sum : 0.0) + k * (logged_count * pilot_sum + pilots * logged_sum)) *
         (s.environment.horizon + 1.0);
}

namespace {

// Rates of bound_cost, measured on the project's 2-core machine (AMD EPYC, 2026-12), Release build:
//  * em_per_observation_z2 = 1e-9 s: `build/bench_em 60` gives 2.6-2.7 ms per regime-aware E-step
//    and M-step over 2000 episodes of H 20 (42000 observations) with Z = 8: 6.2e-8 s per
//    observation, about 1e-9 x Z^2.
//  * em_per_observation = 5e-8 s: `build/dobudget check configs/default.yaml` calibrates 0.02 s per
//    1000 observations fitted at Z = 4 with 3 restarts and 91 E-steps each on average (the mean of
//    `iterations` in that study's runs.csv: typical_iterations below): 7.3e-8 s per observation
//    per E-step, of which Z^2 x 1e-9 = 1.6e-8 s; the rest is per-observation overhead.
//  * kl_seconds = 5e-9 s: the same `check` times model_kl at 0.00066 s per fit, T = 500, H = 8,
//    Z = 4, O = 2: 126000 terms T (H + 1)(Z^2 + Z O + Z).
//  * op_seconds = 1.2e-10 s: `build/bench_planner 5` plans S = 8, A = 3, O = 6, H = 20, N = 500 in
//    176 ms: 1.45e9 terms 2 H A N (S^2 + S O + O N S).
constexpr double em_per_observation = 5e-8;
constexpr double em_per_observation_z2 = 1e-9;
constexpr double kl_seconds = 5e-9;
constexpr double op_seconds = 1.2e-10;
//  * step_seconds = 1.5e-7 s: one step of a rollout (three uniforms, two categorical draws, the
//    belief update) beyond its alpha products: `dobudget plan` of a study with S = 3, A = 2,
//    O = 2, H = 10, N = 20, exact_histories 0 and 2 million rollouts per evaluation took 14.3 s
//    for 10^8 rollout steps (tests/cli/test_stop.cpp's study, rollouts raised).
constexpr double step_seconds = 1.5e-7;
// E-steps of a typical start: the default study's fits averaged 91 (cap 200; DEVELOPERS.md).
constexpr double typical_iterations = 100.0;

// Seconds of planning in a model of K states and evaluating that plan (see the header): the
// exact walk is tried first (it stops after exact_histories histories), then rollouts.
double return_gap_seconds(const ScenarioSizes& z, double K) {
  const double planning = 2.0 * z.H * z.A * z.N * (K * K + K * z.O + z.O * z.N * K) * op_seconds;
  const double per_step = step_seconds + (z.N * K + K * K + z.S * z.S) * op_seconds;
  return planning + (z.X + z.R * z.H) * per_step;
}

// Seconds of the measures of one fit.
double measure_seconds(const ScenarioSettings& s) {
  const ScenarioSizes z = sizes_of(s);
  double t = 0.0;
  if (measured(s, Measure::model_kl)) t += z.T * (z.H + 1.0) * (z.Z * z.Z + z.Z * z.O + z.Z) * kl_seconds;
  if (measured(s, Measure::return_gap)) t += return_gap_seconds(z, z.Z);
  return t;
}

}  // namespace

CostBound bound_fit_cost(const ScenarioSettings& s, double episodes) {
  const ScenarioSizes z = sizes_of(s);
  const double obs = episodes * (z.H + 1.0);
  const double step = obs * (em_per_observation + em_per_observation_z2 * z.Z * z.Z) + z.A * z.O * z.Z * z.Z * op_seconds;
  // Typical: `restarts` starts of typical length. At most: every start the fit may run (fit.hpp:
  // up to 3 warm starts plus a random one, or up to fit.max_restarts while the best optimum is not
  // confirmed), each to fit.max_iterations.
  const double cap = s.fit.max_iterations, restarts = std::max(1, s.fit.restarts);
  const double most_starts = std::max({restarts, 4.0, static_cast<double>(s.fit.max_restarts)});
  return {restarts * std::min(cap, typical_iterations) * step, most_starts * cap * step};
}

CostBound bound_cost(const Study& study, const std::vector<UnitId>& units) {
  CostBound out;
  std::map<std::pair<int, int>, int> draws;
  std::map<int, double> units_of;  // per scenario
  for (const UnitId& u : units) {
    draws[{u.scenario, u.draw}] = 1;
    units_of[u.scenario] += 1.0;
  }
  for (const auto& [index, count] : units_of) {
    const ScenarioSettings& s = study.scenarios[static_cast<std::size_t>(index)].settings;
    // Fits of one unit: observations summed over distinct fits, as one fit of that many episodes.
    const double episodes = observations_per_unit(s) / (s.environment.horizon + 1.0);
    const CostBound fits = bound_fit_cost(s, episodes);
    double per_unit_measures = static_cast<double>(fits_per_unit(s)) * measure_seconds(s);
    if (measured(s, Measure::return_gap)) {  // the true plan's rollout returns, once per unit
      const ScenarioSizes z = sizes_of(s);
      per_unit_measures += z.R * z.H * (step_seconds + (z.N * z.S + z.S * z.S) * op_seconds);
    }
    // bound_fit_cost charges the A O Z^2 load once; a unit pays it per fit (negligible beside obs).
    out.core_seconds += count * (fits.core_seconds + per_unit_measures);
    out.max_core_seconds += count * (fits.max_core_seconds + per_unit_measures);
  }
  for (const auto& [key, one] : draws) {
    const ScenarioSettings& s = study.scenarios[static_cast<std::size_t>(key.first)].settings;
    if (!measured(s, Measure::return_gap)) continue;
    const ScenarioSizes z = sizes_of(s);
    const double per_draw = return_gap_seconds(z, z.S);
    out.core_seconds += per_draw;
    out.max_core_seconds += per_draw;
  }
  return out;
}

CostEstimate estimate_cost(const Study& study, int calibration_episodes) {
  CostEstimate out;
  for (const auto& sc : study.scenarios) {
    const ScenarioSettings& s = sc.settings;
    const auto t_start = std::chrono::steady_clock::now();
    const StreamKey key = unit_stream_key(study.seed, sc.index, 0, 0);
    const Environment env = make_environment(s, key);
    // Calibration data: pilot and logged episodes in the proportions of the largest budgets.
    // In double: the products overflowed int for budgets above about 2 million.
    const double total = static_cast<double>(s.pilot_budgets.back()) + s.logged_budgets.back();
    const int n_pilot = std::max(1, static_cast<int>(calibration_episodes * (s.pilot_budgets.back() / total)));
    const int n_logged = static_cast<int>(calibration_episodes * (s.logged_budgets.back() / total));
    Engine rng = make_engine(key, Purpose::fit, name_key("calibration"));
    const Dataset pilot = simulate(env, Regime::pilot, n_pilot, rng);
    const Dataset logged = simulate(env, Regime::logged, n_logged, rng);
    const auto t_fit = std::chrono::steady_clock::now();
    const FitResult f = fit({{&pilot, n_pilot, Regime::pilot}, {&logged, n_logged, Regime::logged}}, true, s.fit,
                            env.model, rng);
    ScenarioCost c;
    c.scenario = sc.index;
    c.calibration_starts = f.starts;
    c.calibration_confirmed = f.confirmed;
    c.seconds_per_observation = seconds_since(t_fit) / (static_cast<double>(n_pilot + n_logged) * (s.environment.horizon + 1));
    const auto t_measure = std::chrono::steady_clock::now();
    for (Measure m : s.measures) {
      if (m == Measure::model_kl) {
        Engine erng = make_engine(key, Purpose::evaluation);
        model_kl(make_evaluation_set(env.model, simulate(env, Regime::pilot, s.evaluation.trajectories, erng)), f.model);
      } else {
        const auto t_ref = std::chrono::steady_clock::now();
        const ReturnGapReference ref = prepare_return_gap(env.model, s.planner, key);
        c.seconds_per_draw = seconds_since(t_ref);
        return_gap(env.model, f.model, ref, s.planner, key);
      }
    }
    c.measure_seconds_per_fit = seconds_since(t_measure) - c.seconds_per_draw;
    for (const auto& u : enumerate_units(study))
      if (u.scenario == sc.index) ++c.units;
    c.fits = static_cast<long long>(c.units) * fits_per_unit(s);
    const int draws = s.environment.given ? 1 : s.environment.draws;
    c.core_seconds = c.units * c.seconds_per_observation * observations_per_unit(s) +
                     static_cast<double>(c.fits) * c.measure_seconds_per_fit + draws * c.seconds_per_draw;
    c.calibration_seconds = seconds_since(t_start);
    out.core_seconds += c.core_seconds;
    out.scenarios.push_back(c);
  }
  return out;
}

}  // namespace dobudget
