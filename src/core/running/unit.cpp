#include "core/running/unit.hpp"

#include <algorithm>
#include <chrono>
#include <limits>
#include <map>
#include <tuple>

#include "core/world/dataset.hpp"
#include "core/fitting/fit.hpp"
#include "core/measures/model_kl.hpp"
#include "core/measures/return_gap.hpp"
#include "core/running/pilot_design.hpp"
#include "core/world/synthetic.hpp"

namespace dobudget {

std::vector<UnitId> enumerate_units(const Study& study) {
  std::vector<UnitId> units;
  for (const auto& sc : study.scenarios) {
    const int draws = sc.settings.environment.given ? 1 : sc.settings.environment.draws;
    for (int d = 0; d < draws; ++d)
      for (int r = 0; r < sc.settings.replicates; ++r) units.push_back({sc.index, d, r});
  }
  return units;
}

namespace {

// The fit a (strategy, logged, pilot) cell needs, with coinciding data mapped to one key.
struct FitKey {
  Strategy strategy;
  int logged;
  int pilot;
  auto operator<=>(const FitKey&) const = default;
};

FitKey fit_key(Strategy s, int logged, int pilot) {
  if (s == Strategy::pilot_only || logged == 0) return {Strategy::pilot_only, 0, pilot};
  return {s, logged, pilot};
}

}  // namespace

// The distinct fit_key()s of a unit, counted (see the header): the pilot-only fit at each pilot
// budget above 0 when some cell maps to it (pilot budget 0 without logged episodes has no data and
// is not fitted), and one fit per (other strategy, logged budget > 0, pilot budget).
long long fits_per_unit(const ScenarioSettings& s) {
  const auto P = static_cast<long long>(s.pilot_budgets.size());
  const auto P_data = static_cast<long long>(
      std::count_if(s.pilot_budgets.begin(), s.pilot_budgets.end(), [](int n) { return n > 0; }));
  const auto k = static_cast<long long>(
      std::count_if(s.strategies.begin(), s.strategies.end(), [](Strategy st) { return st != Strategy::pilot_only; }));
  const auto logged = static_cast<long long>(
      std::count_if(s.logged_budgets.begin(), s.logged_budgets.end(), [](int L) { return L > 0; }));
  const bool pilot_only_fit = k < static_cast<long long>(s.strategies.size()) ||
                              logged < static_cast<long long>(s.logged_budgets.size());
  return (pilot_only_fit ? P_data : 0) + P * k * logged;
}

DrawContext make_draw_context(const Study& study, int scenario, int draw, const StopToken& stop) {
  const ScenarioSettings& s = study.scenarios[static_cast<std::size_t>(scenario)].settings;
  const StreamKey key = unit_stream_key(study.seed, scenario, draw, 0);
  DrawContext c;
  c.environment = make_environment(s, key);
  for (Measure m : s.measures)
    if (m == Measure::return_gap)
      c.return_gap = std::make_shared<const ReturnGapReference>(prepare_return_gap(c.environment.model, s.planner, key, stop));
  return c;
}

std::vector<RunRecord> run_unit(const Study& study, const UnitId& u, const DrawContext& ctx, const StopToken& stop) {
  const ScenarioSettings& s = study.scenarios[static_cast<std::size_t>(u.scenario)].settings;
  const Environment& env = ctx.environment;
  const StreamKey key = unit_stream_key(study.seed, u.scenario, u.draw, u.replicate);  // paired scenarios

  stop.poll();  // a unit started after a stop does nothing
  // Nested data: every budget is a prefix of the largest budget's episodes.
  Engine pilot_rng = make_engine(key, Purpose::pilot);
  Engine logged_rng = make_engine(key, Purpose::logged);
  const Dataset logged = simulate(env, Regime::logged, s.logged_budgets.back(), logged_rng);
  // The pilot policy reads the logged records and the observable shape only (pilot_design.hpp);
  // the simulator keeps the state. Its streams do not depend on the policy (paired scenarios).
  const std::unique_ptr<PilotPolicy> policy = make_pilot_policy(s, logged, observable_shape(env.model), key, stop);
  const Dataset pilot = simulate_pilot(env, *policy, s.pilot_budgets.back(), pilot_rng);

  bool want_kl = false, want_gap = false;
  for (Measure m : s.measures) (m == Measure::model_kl ? want_kl : want_gap) = true;
  std::vector<double> star_returns;  // the true plan's rollout returns, shared by every fit of the replicate
  if (want_gap) star_returns = true_plan_returns(env.model, *ctx.return_gap, s.planner, key, stop);
  EvaluationSet eval;
  if (want_kl) {
    Engine eval_rng = make_engine(key, Purpose::evaluation);
    eval = make_evaluation_set(env.model, simulate(env, Regime::pilot, s.evaluation.trajectories, eval_rng), stop);
  }

  struct Cell {
    FitResult fit;
    std::optional<double> kl, gap;
    std::string note;
    double seconds = 0.0;
  };
  // Every fit the unit needs, computed in the order of FitKey (pilot-only, pooled, regime-aware;
  // logged and pilot budgets ascending), whatever the order the settings list: so each fit can
  // start from the fits of the same data computed before it (fit.hpp, "Starts"): the pilot-only
  // fit of the same pilot budget, the pooled fit of the same budgets (for regime-aware), and the
  // same strategy's fit at the next smaller pilot budget (nested data: a prefix of this fit's).
  std::map<FitKey, Cell> cells;
  for (Strategy st : s.strategies)
    for (int L : s.logged_budgets)
      for (int n : s.pilot_budgets) cells.emplace(fit_key(st, L, n), Cell{});
  // The round a pilot budget was added in (settings.hpp, pilot_rounds): the warm start from the
  // next smaller pilot budget is taken only within one round, so that a round's rows do not depend
  // on the budgets later rounds add.
  const auto round_of = [&s](int n) {
    if (s.pilot_rounds.empty()) return 0;
    const auto it = std::find(s.pilot_budgets.begin(), s.pilot_budgets.end(), n);
    return s.pilot_rounds[static_cast<std::size_t>(it - s.pilot_budgets.begin())];
  };
  std::map<std::tuple<Strategy, int, int>, const FitKey*> previous_in_round;  // (strategy, logged, round)
  for (auto& [k, c] : cells) {
    if (k.strategy == Strategy::pilot_only && k.pilot == 0) {
      // No data at all (pilot budget 0, no logged episodes used): nothing is fitted, and the cell
      // fails every target (+infinity), or is empty where the draw leaves no room for planning,
      // like every other fit of the draw. It offers no warm start (its fit has no starts).
      c.note = kNoData;
      if (want_kl) c.kl = std::numeric_limits<double>::infinity();
      if (want_gap && ctx.return_gap->room) c.gap = std::numeric_limits<double>::infinity();
      if (want_gap && !ctx.return_gap->room) c.note = ctx.return_gap->note;
      continue;
    }
    std::vector<DataView> views{{&pilot, k.pilot, Regime::pilot}};
    if (k.strategy != Strategy::pilot_only)
      views.push_back({&logged, k.logged, k.strategy == Strategy::regime_aware ? Regime::logged : Regime::pilot});
    std::vector<WarmStart> warm;
    auto offer = [&](const FitKey& from) {
      if (const auto it = cells.find(from); it != cells.end() && it->second.fit.starts > 0)
        warm.push_back({&it->second.fit.model, &it->second.fit.decision});
    };
    if (k.strategy != Strategy::pilot_only) offer({Strategy::pilot_only, 0, k.pilot});
    if (k.strategy == Strategy::regime_aware) offer({Strategy::pooled, k.logged, k.pilot});
    const FitKey*& previous = previous_in_round[{k.strategy, k.logged, round_of(k.pilot)}];
    if (previous != nullptr) offer(*previous);
    previous = &k;
    Engine fit_rng = make_engine(
        key, Purpose::fit,
        combine(combine(name_key(name(k.strategy)), static_cast<std::uint64_t>(k.logged)), static_cast<std::uint64_t>(k.pilot)));
    const auto t0 = std::chrono::steady_clock::now();
    c.fit = fit(views, k.strategy == Strategy::regime_aware, s.fit, env.model, fit_rng, warm, stop);
    c.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
    if (want_kl) c.kl = model_kl(eval, c.fit.model, stop);
    if (want_gap) {
      const ReturnGapResult g =
          return_gap(env.model, c.fit.model, *ctx.return_gap, s.planner, key, &star_returns, stop);
      c.gap = g.gap;
      c.note = g.note;
    }
  }

  std::vector<RunRecord> rows;
  for (Strategy st : s.strategies) {
    for (int L : s.logged_budgets) {
      for (int n : s.pilot_budgets) {
        const Cell& c = cells.at(fit_key(st, L, n));
        RunRecord r;
        r.scenario = u.scenario;
        r.environment = u.draw;
        r.replicate = u.replicate;
        r.strategy = st;
        r.logged = L;
        r.pilot = n;
        r.model_kl = c.kl;
        r.return_gap = c.gap;
        r.loglik = c.fit.loglik;
        r.iterations = c.fit.iterations;
        r.converged = c.fit.converged;
        r.note = c.note;
        r.fit_seconds = c.seconds;
        r.starts = c.fit.starts;
        r.confirmed = c.fit.confirmed;
        rows.push_back(r);
      }
    }
  }
  return rows;
}

}  // namespace dobudget
