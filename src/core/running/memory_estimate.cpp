// Peak memory of a study's units; see memory_estimate.hpp for the count.
#include "core/running/memory_estimate.hpp"

#include <algorithm>

#include "core/fitting/forward_backward.hpp"
#include "core/running/run_record.hpp"
#include "core/running/scenario_sizes.hpp"
#include "core/running/unit.hpp"

namespace dobudget {
namespace {

constexpr double int_bytes = 4.0, double_bytes = 8.0;

// Belief points, alpha vectors and one backup's workspace of a plan over K states (header).
double plan_bytes(double K, double H, double N, double A, double O) {
  return 3.0 * H * N * K * double_bytes + (N * (3.0 * K + O + A + N) + K * N) * double_bytes + N * A * O * int_bytes;
}

}  // namespace

double bytes_per_row() {
  // The journal's copy, the result's copy and the runs.csv text being written (a line is under
  // 256 bytes), each with its allocation overhead rounded into the 256.
  return 2.0 * static_cast<double>(sizeof(RunRecord)) + 256.0;
}

std::vector<MemoryPart> unit_memory(const ScenarioSettings& s) {
  const ScenarioSizes z = sizes_of(s);
  const double S = z.S, A = z.A, O = z.O, H = z.H, Z = z.Z, P = z.P, L = z.L, T = z.T, N = z.N, R = z.R;
  const double n = Z + A * Z * Z + Z * O + Z * A;  // parameters of one fitted model
  const double F = static_cast<double>(fits_per_unit(s));
  const double pilots = static_cast<double>(s.pilot_budgets.size()), loggeds = static_cast<double>(s.logged_budgets.size());
  const double strategies = static_cast<double>(s.strategies.size());

  std::vector<MemoryPart> parts;
  parts.push_back({MemoryPartId::datasets, (P + L) * (2.0 * H + 1.0) * int_bytes,
                   {{Driver::pilot_budget, P}, {Driver::logged_budget, L}, {Driver::horizon, H}}});
  if (measured(s, Measure::model_kl))
    parts.push_back({MemoryPartId::evaluation_histories,
                     T * (2.0 * H + 1.0) * int_bytes + 3.0 * T * (H + 1.0) * O * double_bytes,
                     {{Driver::trajectories, T}, {Driver::horizon, H}, {Driver::observations, O}}});
  // The forward-backward workspace (forward_backward.hpp): per lane of a batch, (H + 1)(3Z + 3)
  // (alpha, e, gamma, scale, 1/scale, o_t), H(Z + 1) (u, a_t) and Z + AZ^2 + OZ + AZ + Z + 1
  // (beta, transition and gamma sums, liveness); once, the selection tables 8(Z^2 + 2Z).
  const double lanes = static_cast<double>(ForwardBackward::kLanes);
  const double fb_doubles = lanes * ((H + 1.0) * (3.0 * Z + 3.0) + H * (Z + 1.0) + Z + A * Z * Z + O * Z + A * Z + Z + 1.0) +
                            8.0 * (Z * Z + 2.0 * Z);
  parts.push_back({MemoryPartId::model_fit,
                   15.0 * n * double_bytes + fb_doubles * double_bytes,
                   {{Driver::latent_states, Z}, {Driver::actions, A}, {Driver::observations, O}, {Driver::horizon, H}}});
  parts.push_back({MemoryPartId::fitted_models_kept, F * n * double_bytes,
                   {{Driver::latent_states, Z},
                    {Driver::pilot_budget_count, pilots},
                    {Driver::logged_budget_count, loggeds},
                    {Driver::strategy_count, strategies},
                    {Driver::actions, A},
                    {Driver::observations, O}}});
  if (measured(s, Measure::return_gap)) {
    parts.push_back({MemoryPartId::planner_fitted, plan_bytes(Z, H, N, A, O) + 3.0 * R * double_bytes,
                     {{Driver::belief_points, N}, {Driver::horizon, H}, {Driver::latent_states, Z}, {Driver::rollouts, R}}});
    parts.push_back({MemoryPartId::planner_true, plan_bytes(S, H, N, A, O),
                     {{Driver::belief_points, N}, {Driver::horizon, H}, {Driver::states, S}}});
  }
  return parts;
}

MemoryPart MemoryEstimate::largest() const {
  MemoryPart best = results;
  for (const MemoryPart& p : unit_parts)
    if (p.bytes * concurrent_units > best.bytes) {
      best = p;
      best.bytes *= concurrent_units;
    }
  return best;
}

MemoryEstimate estimate_memory(const Study& study, int threads) {
  MemoryEstimate out;
  double units = 0.0, rows = 0.0, draws = 0.0, replicates = 0.0, pilots = 0.0, loggeds = 0.0, strategies = 0.0;
  for (const Scenario& sc : study.scenarios) {
    const ScenarioSettings& s = sc.settings;
    const double d = s.environment.given ? 1.0 : static_cast<double>(s.environment.draws);
    const double u = d * s.replicates;
    units += u;
    rows += u * static_cast<double>(s.strategies.size()) * static_cast<double>(s.logged_budgets.size()) *
            static_cast<double>(s.pilot_budgets.size());
    draws = std::max(draws, d);
    replicates = std::max(replicates, static_cast<double>(s.replicates));
    pilots = std::max(pilots, static_cast<double>(s.pilot_budgets.size()));
    loggeds = std::max(loggeds, static_cast<double>(s.logged_budgets.size()));
    strategies = std::max(strategies, static_cast<double>(s.strategies.size()));
    std::vector<MemoryPart> parts = unit_memory(s);
    double total = 0.0;
    for (const MemoryPart& p : parts) total += p.bytes;
    if (total > out.unit_bytes || out.unit_parts.empty()) {
      out.unit_bytes = total;
      out.unit_parts = std::move(parts);
      out.scenario = sc.index;
    }
  }
  out.concurrent_units = static_cast<int>(std::max(1.0, std::min<double>(std::max(1, threads), units)));
  out.results = {MemoryPartId::results,
                 rows * bytes_per_row(),
                 {{Driver::scenarios, static_cast<double>(study.scenarios.size())},
                  {Driver::draws, draws},
                  {Driver::replicates, replicates},
                  {Driver::strategy_count, strategies},
                  {Driver::logged_budget_count, loggeds},
                  {Driver::pilot_budget_count, pilots}}};
  out.peak_bytes = out.concurrent_units * out.unit_bytes + out.results.bytes;
  return out;
}

}  // namespace dobudget
