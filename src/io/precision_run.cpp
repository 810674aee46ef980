#include "io/precision_run.hpp"

#include "io/csv_records.hpp"

#include <fmt/format.h>

#include <chrono>
#include <map>
#include <nlohmann/json.hpp>
#include <optional>
#include <stdexcept>
#include <tuple>

#include "core/running/cost_estimate.hpp"
#include "io/answer_table.hpp"
#include "io/atomic_file.hpp"
#include "io/csv.hpp"
#include "io/study_file.hpp"

namespace dobudget::io {
namespace {

using UnitKey = std::tuple<int, int, int>;  // scenario, draw, replicate
using CellKey = std::tuple<Strategy, int, int>;  // strategy, logged, pilot

UnitKey key_of(const UnitId& u) { return {u.scenario, u.draw, u.replicate}; }

// The round study with only the budgets `design` adds: what its units that existed in the round
// before still have to fit (an empty budget list when the round adds none).
Study added_budgets_study(const Study& round, const SearchDesign& design) {
  Study out = round;
  for (Scenario& sc : out.scenarios) {
    ScenarioSettings& s = sc.settings;
    std::vector<int> budgets, rounds;
    for (std::size_t i = 0; i < s.pilot_budgets.size(); ++i)
      if (s.pilot_rounds[i] == design.round) {
        budgets.push_back(s.pilot_budgets[i]);
        rounds.push_back(s.pilot_rounds[i]);
      }
    s.pilot_budgets = budgets;
    s.pilot_rounds = rounds;
  }
  return out;
}

// What one round computes, and its cost from counts.
struct RoundWork {
  Study study;  // the round's study
  Study added;  // its budgets of this round only
  bool adds_budgets = false;
  std::vector<UnitId> units;
  std::vector<bool> existed;  // per unit: it was in the round before (needs only the added budgets)
  long long fits = 0;
  double core_seconds = 0.0;
};

RoundWork round_work(const Study& range, const SearchDesign& design, const std::optional<SearchDesign>& before) {
  RoundWork w{round_study(range, design), {}, false, {}, {}, 0, 0.0};
  w.added = added_budgets_study(w.study, design);
  w.adds_budgets = !w.added.scenarios.front().settings.pilot_budgets.empty();
  w.units = enumerate_units(w.study);
  std::vector<UnitId> old_units, new_units;
  for (const UnitId& u : w.units) {
    const bool existed = before && unit_in_design(range, *before, u);
    w.existed.push_back(existed);
    (existed ? old_units : new_units).push_back(u);
  }
  for (const UnitId& u : new_units) w.fits += fits_per_unit(w.study.scenarios[static_cast<std::size_t>(u.scenario)].settings);
  if (!new_units.empty()) w.core_seconds += bound_cost(w.study, new_units).core_seconds;
  if (w.adds_budgets && !old_units.empty()) {
    for (const UnitId& u : old_units) w.fits += fits_per_unit(w.added.scenarios[static_cast<std::size_t>(u.scenario)].settings);
    w.core_seconds += bound_cost(w.added, old_units).core_seconds;
  }
  return w;
}

// A unit's rows in the round study's order (strategy, logged, pilot as its settings list them),
// from the round before's rows and the ones just computed.
std::vector<RunRecord> splice(const ScenarioSettings& s, const std::vector<RunRecord>& before,
                              const std::vector<RunRecord>& fresh) {
  std::map<CellKey, const RunRecord*> cell;
  for (const RunRecord& r : before) cell[{r.strategy, r.logged, r.pilot}] = &r;
  for (const RunRecord& r : fresh) cell[{r.strategy, r.logged, r.pilot}] = &r;
  std::vector<RunRecord> out;
  for (Strategy st : s.strategies)
    for (int L : s.logged_budgets)
      for (int n : s.pilot_budgets) {
        const auto it = cell.find({st, L, n});
        if (it == cell.end()) throw std::logic_error("precision rounds: a row of the round before is missing");
        out.push_back(*it->second);
      }
  return out;
}

std::string budgets_text(const std::vector<int>& b) { return fmt::format("{}", fmt::join(b, " ")); }

}  // namespace

double first_round_core_seconds(const Study& range_study) {
  return round_work(range_study, first_design(range_study), std::nullopt).core_seconds;
}

std::string precision_csv(const std::vector<PrecisionVerdict>& verdicts) {
  std::string out = "scenario,measure,strategy,logged,needed_pilot,low,high,relative_half_width,met,why\n";
  for (const PrecisionVerdict& v : verdicts) {
    const std::string why = csv_field(v.why);  // quoted: it holds commas and semicolons
    out += fmt::format("{},{},{},{},{},{},{},{},{},{}\n", v.row.scenario, name(v.row.measure), name(v.row.strategy),
                       v.row.logged, csv_number(v.row.needed_pilot), csv_number(v.row.low), csv_number(v.row.high),
                       csv_number(v.half_width), v.met ? "yes" : "no", why);
  }
  return out;
}

PrecisionOutcome plan_precision_study(const Study& range, const std::string& resolved, const PlanOptions& opt,
                                      double core_hour_cap, const std::function<void(const RoundSummary&)>& on_round) {
  const auto start = std::chrono::steady_clock::now();
  if (std::filesystem::exists(opt.out) && !std::filesystem::is_directory(opt.out))
    throw std::runtime_error(opt.out.string() + " exists and is not a directory; choose another --out directory");
  claim_directory(opt.out, resolved);

  PrecisionOutcome out;
  SearchDesign design = first_design(range);
  std::optional<SearchDesign> before;
  std::map<UnitKey, std::vector<RunRecord>> rows_before;  // the round before's rows, by unit
  double spent = 0.0;
  bool capped = false;
  double capped_round_seconds = 0.0;
  for (;;) {
    const RoundWork work = round_work(range, design, before);
    if (design.round > 1 && spent + work.core_seconds > core_hour_cap * 3600.0) {
      capped = true;
      capped_round_seconds = work.core_seconds;
      break;
    }
    spent += work.core_seconds;
    const std::string round_resolved = resolved_yaml(work.study);
    PlanOptions ro = opt;
    ro.out = opt.out / fmt::format("round-{}", design.round);
    ro.before_computing = nullptr;
    ro.executor = [&](const Study& study, const std::vector<UnitId>& units, const std::vector<std::size_t>& todo,
                      int threads, const ExecutorHooks& hooks) {
      std::vector<std::size_t> old_todo, new_todo;
      for (std::size_t i : todo) (work.existed[i] ? old_todo : new_todo).push_back(i);
      const auto spliced = [&](std::size_t i, const std::vector<RunRecord>& fresh) {
        const ScenarioSettings& s = study.scenarios[static_cast<std::size_t>(units[i].scenario)].settings;
        return splice(s, rows_before.at(key_of(units[i])), fresh);
      };
      if (work.adds_budgets && !old_todo.empty()) {
        RunnerHooks h = hooks;
        h.on_unit = [&](std::size_t i, std::vector<RunRecord>&& fresh) { hooks.on_unit(i, spliced(i, fresh)); };
        run_units(work.added, units, old_todo, threads, h);
      } else {
        for (std::size_t i : old_todo) {
          if (hooks.stop_requested && hooks.stop_requested()) return;
          hooks.on_unit(i, spliced(i, {}));
        }
      }
      if (hooks.stop_requested && hooks.stop_requested()) return;
      run_units(study, units, new_todo, threads, hooks);
    };
    const PlanOutcome o = plan_study(work.study, round_resolved, ro);
    write_manifest(ro.out, work.study, round_resolved, ro, o);

    RoundSummary rs;
    rs.round = design.round;
    for (std::size_t i = 0; i < design.budgets.size(); ++i)
      if (design.rounds[i] == design.round) rs.added.push_back(design.budgets[i]);
    rs.draws_scale = design.draws_scale;
    rs.replicates_scale = design.replicates_scale;
    rs.units = work.units.size();
    rs.units_resumed = o.units_resumed;
    rs.fits = work.fits;
    rs.estimated_core_seconds = work.core_seconds;
    out.rounds.push_back(rs);
    if (on_round) on_round(rs);
    out.round_dir = ro.out;
    out.units_done = o.units_done;
    out.units_total = o.units_total;
    if (!o.complete) {
      out.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
      return out;
    }
    out.final_study = work.study;
    out.rows = o.rows;
    out.answers = compute_study_answers(work.study, o.rows);
    const SearchStep step = plan_next_round(range, design, out.answers);
    out.verdicts = step.verdicts;
    if (!step.more) break;
    rows_before.clear();
    for (const RunRecord& r : o.rows) rows_before[{r.scenario, r.environment, r.replicate}].push_back(r);
    before = design;
    design = step.next;
  }

  bool all_met = true;
  for (PrecisionVerdict& v : out.verdicts) {
    all_met = all_met && v.met;
    if (capped && !v.met)
      v.why += fmt::format("; not done: the next round (about {:.2g} core-hours) would pass the cap of {:.4g} core-hours",
                           capped_round_seconds / 3600.0, core_hour_cap);
  }
  out.stopped_because = all_met ? "every answer met the precision"
                        : capped ? fmt::format("the next round would pass the cap of {:.4g} core-hours", core_hour_cap)
                                 : "no further round can help the answers that did not meet the precision";
  out.complete = true;
  out.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();

  write_run_tables(opt.out, out.rows);
  write_answer_files(opt.out, out.final_study, out.answers);
  write_file_atomically(opt.out / "precision.csv", precision_csv(out.verdicts));
  nlohmann::ordered_json j = manifest_base(range, resolved);
  j["final_round"] = out.rounds.back().round;
  j["stopped_because"] = out.stopped_because;
  double estimated = 0.0;
  long long fits = 0;
  nlohmann::ordered_json rounds = nlohmann::ordered_json::array();
  for (const RoundSummary& r : out.rounds) {
    rounds.push_back({{"round", r.round},
                      {"added_pilot_budgets", budgets_text(r.added)},
                      {"draws_scale", r.draws_scale},
                      {"replicates_scale", r.replicates_scale},
                      {"units", r.units},
                      {"fits_computed", r.fits},
                      {"estimated_core_seconds", r.estimated_core_seconds}});
    estimated += r.estimated_core_seconds;
    fits += r.fits;
  }
  j["rounds"] = rounds;
  j["fits_computed"] = fits;
  j["estimated_core_seconds"] = estimated;
  j["threads"] = opt.threads;
  j["complete"] = true;
  j["wall_seconds"] = out.seconds;
  j["finished_utc"] = utc_timestamp();
  write_file_atomically(opt.out / "manifest.json", j.dump(2) + "\n");
  return out;
}

}  // namespace dobudget::io
