// Peak memory of a study's units; see memory_estimate.hpp for the count.
#include "core/memory_estimate.hpp"

#include <unistd.h>

#include <algorithm>
#include <cstdio>

#include "core/run_record.hpp"
#include "core/unit.hpp"

namespace dobudget {
namespace {

constexpr double int_bytes = 4.0, double_bytes = 8.0;

// Belief points, alpha vectors and one backup's workspace of a plan over K states (header).
double plan_bytes(double K, double H, double N, double A, double O) {
  return 3.0 * H * N * K * double_bytes + (N * (3.0 * K + O + A + N) + K * N) * double_bytes + N * A * O * int_bytes;
}

bool measures(const ScenarioSettings& s, Measure m) {
  return std::find(s.measures.begin(), s.measures.end(), m) != s.measures.end();
}

}  // namespace

double bytes_per_row() {
  // The journal's copy, the result's copy and the runs.csv text being written (a line is under
  // 256 bytes), each with its allocation overhead rounded into the 256.
  return 2.0 * static_cast<double>(sizeof(RunRecord)) + 256.0;
}

std::vector<MemoryPart> unit_memory(const ScenarioSettings& s) {
  const EnvironmentSettings& e = s.environment;
  const double S = e.given ? e.given->model.states : e.family.states;
  const double A = e.given ? e.given->model.actions : e.family.actions;
  const double O = e.given ? e.given->model.observations : e.family.observations;
  const double H = e.horizon, Z = s.fit.latent_states;
  const double P = s.pilot_budgets.back(), L = s.logged_budgets.back();
  const double T = s.evaluation.trajectories, N = s.planner.belief_points, R = s.planner.rollouts;
  const double n = Z + A * Z * Z + Z * O + Z * A;  // parameters of one fitted model
  const double F = fits_per_unit(s);

  std::vector<MemoryPart> parts;
  parts.push_back({"datasets", "budgets.pilot, budgets.logged, environment.horizon",
                   (P + L) * (2.0 * H + 1.0) * int_bytes});
  if (measures(s, Measure::model_kl))
    parts.push_back({"evaluation histories", "evaluation.trajectories, environment.horizon, environment.observations",
                     T * (2.0 * H + 1.0) * int_bytes + 3.0 * T * (H + 1.0) * O * double_bytes});
  parts.push_back({"model fit", "fit.latent_states, environment.actions, environment.observations",
                   15.0 * n * double_bytes + 2.0 * A * O * Z * Z * double_bytes + (H + 1.0) * (Z + 1.0) * double_bytes});
  parts.push_back({"fitted models kept", "fit.latent_states, budgets, strategies", F * n * double_bytes});
  if (measures(s, Measure::return_gap)) {
    parts.push_back({"planner (fitted model)", "planner.belief_points, environment.horizon, fit.latent_states",
                     plan_bytes(Z, H, N, A, O) + 3.0 * R * double_bytes});
    parts.push_back({"planner (true model)", "planner.belief_points, environment.horizon, environment.states",
                     plan_bytes(S, H, N, A, O)});
  }
  return parts;
}

MemoryPart MemoryEstimate::largest() const {
  MemoryPart best = results;
  for (const MemoryPart& p : unit_parts)
    if (p.bytes * concurrent_units > best.bytes) best = {p.what, p.keys, p.bytes * concurrent_units};
  return best;
}

MemoryEstimate estimate_memory(const Study& study, int threads) {
  MemoryEstimate out;
  double units = 0.0, rows = 0.0;
  for (const Scenario& sc : study.scenarios) {
    const ScenarioSettings& s = sc.settings;
    const double u = static_cast<double>(s.environment.given ? 1 : s.environment.draws) * s.replicates;
    units += u;
    rows += u * static_cast<double>(s.strategies.size() * s.logged_budgets.size() * s.pilot_budgets.size());
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
  out.results = {"results kept until the tables are written", "replicates, environment.draws, sweep, budgets, strategies",
                 rows * bytes_per_row()};
  out.peak_bytes = out.concurrent_units * out.unit_bytes + out.results.bytes;
  return out;
}

std::string format_bytes(double b) {
  const char* unit[] = {"bytes", "kB", "MB", "GB", "TB", "PB", "EB"};
  int k = 0;
  while (b >= 1000.0 && k < 6) {
    b /= 1000.0;
    ++k;
  }
  char buf[64];
  std::snprintf(buf, sizeof buf, k == 0 ? "%.0f %s" : "%.3g %s", b, unit[k]);
  return buf;
}

std::string memory_refusal(const MemoryEstimate& m, double available) {
  if (available <= 0.0 || m.peak_bytes <= available) return {};
  const MemoryPart big = m.largest();
  return "the estimated peak memory, " + format_bytes(m.peak_bytes) + " (" + std::to_string(m.concurrent_units) +
         " unit(s) at once), is more than this machine's " + format_bytes(available) + "; the largest part is " +
         big.what + ", " + format_bytes(big.bytes) + ", driven by " + big.keys +
         ": lower them (or use fewer threads; `dobudget check` shows every part)";
}

double physical_memory_bytes() {
  const long pages = ::sysconf(_SC_PHYS_PAGES), page = ::sysconf(_SC_PAGE_SIZE);
  if (pages <= 0 || page <= 0) return 0.0;
  return static_cast<double>(pages) * static_cast<double>(page);
}

}  // namespace dobudget
