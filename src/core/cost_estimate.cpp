#include "core/cost_estimate.hpp"

#include <algorithm>
#include <chrono>
#include <map>

#include "core/dataset.hpp"
#include "core/fit.hpp"
#include "core/model_kl.hpp"
#include "core/return_gap.hpp"
#include "core/synthetic.hpp"
#include "core/unit.hpp"

namespace dobudget {
namespace {

double seconds_since(std::chrono::steady_clock::time_point t0) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
}

// Observations seen by all distinct fits of one unit (fits whose data coincide are shared).
double observations_per_unit(const ScenarioSettings& s) {
  std::map<std::tuple<int, int, int>, double> fits;  // (strategy, logged, pilot) after sharing
  for (Strategy st : s.strategies)
    for (int L : s.logged_budgets)
      for (int n : s.pilot_budgets) {
        const bool shared = st == Strategy::pilot_only || L == 0;
        fits[{shared ? 0 : static_cast<int>(st), shared ? 0 : L, n}] =
            static_cast<double>(n + (shared ? 0 : L)) * (s.environment.horizon + 1);
      }
  double total = 0.0;
  for (const auto& [k, obs] : fits) total += obs;
  return total;
}

}  // namespace

CostEstimate estimate_cost(const Study& study, int calibration_episodes) {
  CostEstimate out;
  for (const auto& sc : study.scenarios) {
    const ScenarioSettings& s = sc.settings;
    const auto t_start = std::chrono::steady_clock::now();
    const StreamKey key{study.seed, static_cast<std::uint64_t>(sc.index), 0, 0};
    const Environment env = make_environment(s, key);
    // Calibration data: pilot and logged episodes in the proportions of the largest budgets.
    const double total = s.pilot_budgets.back() + s.logged_budgets.back();
    const int n_pilot = std::max(1, static_cast<int>(calibration_episodes * s.pilot_budgets.back() / total));
    const int n_logged = static_cast<int>(calibration_episodes * s.logged_budgets.back() / total);
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
