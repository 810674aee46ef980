// The answer (docs/design.md, "The answer"): pilot episodes needed, with assurance, a bootstrap interval,
// the learning-curve floor, and the savings against pilot-only. A pure computation on stored
// run records: no files, no YAML, no command line.
//
// For one query (measure, target epsilon, assurance beta, criterion), one strategy and one logged
// budget N_L, let the pairs be the (environment draw, replicate) units of the scenario that have a
// value of the measure for that strategy and logged budget at one or more pilot budgets.
//
// Criterion `assurance` (default): at each pilot budget n_k the success fraction
//   f_k = #{pairs with value <= epsilon} / m_k,   m_k = #{pairs with a value at n_k}
// is made non-decreasing in n by weighted isotonic regression (weights m_k; isotonic.hpp), and the
// needed budget is the smallest n where it reaches beta, interpolated linearly in log n between
// the grid points around the crossing:
//   n = exp(log n_i + (beta - f_i) / (f_{i+1} - f_i) * (log n_{i+1} - log n_i)).
// Criterion `mean`: the mean measure g_k over the pairs, made non-increasing, reaches <= epsilon;
// interpolated in log n the same way.
//
// Statuses:
//   met-at-smallest  the criterion holds at the smallest budget; needed = that budget, an upper
//                    bound (fewer may do, the grid cannot tell), exact when that budget is 0.
//   reached          crossing between two grid points, interpolated in log n.
//   extrapolated     the largest budget falls short; the learning curve e(n) = c + a n^(-b)
//                    (learning_curve.hpp) fitted to the per-budget statistic has floor c < epsilon
//                    and needed solves e(n) = epsilon (never reported below the largest budget).
//   unreachable      as above but c >= epsilon: needed = +infinity, floor = c.
//   not-reached      the largest budget falls short and no curve can be fitted (fewer than three
//                    budgets with data): needed is unknown (NaN).
// Under `assurance` the curve is fitted to the beta-quantile of the measure across pairs at each
// budget, the inverse empirical distribution Q(beta) = min{ x : F_k(x) >= beta } (Hyndman and Fan,
// "Sample quantiles in statistical packages", Am. Stat. 50(4), 1996, definition 1). It is the
// statistic consistent with the success fraction: F_k(epsilon) >= beta  <=>  Q_k(beta) <= epsilon,
// so the curve crosses epsilon where the fraction would reach beta. Under `mean` the curve is
// fitted to the means. Weights are inverse squared standard errors (learning_curve.hpp).
//
// Missing values (std::nullopt, e.g. return_gap when V* - V_uniform is too small: no room for
// planning) are excluded from the denominators m_k; `pairs` reports how many pairs contributed.
// A NaN value counts as missing; +infinity (a model giving an observation probability 0) counts as
// a failure, and enters means and quantiles as 1e290 so that they stay finite.
// A pilot budget where no pair has a value is dropped from the grid. A grid segment that starts
// at budget 0 is interpolated linearly in n (log 0 is undefined) and budget 0 is left out of the
// learning curve. At pilot budget 0 a strategy that uses logged data is fitted on them alone, and
// a cell with no data at all (pilot-only, or any strategy at logged 0) has +infinity: a failure
// (unit.hpp, kNoData).
//
// Interval: a two-stage percentile bootstrap (Efron and Tibshirani, "An Introduction to the
// Bootstrap", 1993, ch. 13; resampling hierarchical data: Davison and Hinkley, "Bootstrap Methods
// and their Application", 1997, sec. 3.8). Replicates of one environment draw share their world,
// so pairs are not independent; each resample draws D environment draws with replacement from the
// D draws of the cell, then, within each drawn world, as many replicates as it has with
// replacement from its own (one draw, as with a given model: replicates only). Each resample
// recomputes the whole answer (monotone fit, crossing, extrapolation). `draws` reports D: with
// few draws even this scheme understates the spread between worlds (tests/core/answer/test_answer.cpp,
// "coverage").
// The interval also carries where the crossing lies between the simulated budgets: a resample
// whose monotone curve crosses between n_{i-1} and n_i brackets its crossing by [n_{i-1}, n_i]
// (the interpolation is a guess inside it); met at the smallest budget n_0, by [0, n_0];
// extrapolated, by [largest budget, extrapolated need]; unreachable or not-reached, by
// [largest budget, +infinity]. low is the alpha-percentile of the lower ends and high the
// (1 - alpha)-percentile of the upper ends, with alpha = (1 - interval) / 2, each taken at the
// outer order statistic (Hyndman and Fan definition 7's position, rounded outwards), so both ends
// are simulated budgets (or an extrapolated need, or +infinity). As every resample's crossing lies
// in its bracket, [low, high] contains the percentile interval of the crossings themselves,
// wherever they lie between the budgets: a jump from 0 to every pair between 300 and 1000 gives
// [300, 1000], and only budgets close together around the crossing give a narrow interval.
// sampling_low, sampling_high are the plain percentile interval of the interpolated needs (type 7,
// +infinity absorbing, unreachable and not-reached resamples as +infinity): the sampling part of
// the spread alone. relative_half_width and meets_precision (below) say whether an answer is
// within a stated precision.
// The stream is make_engine(unit_stream_key(study_seed, scenario, 0, 0), Purpose::bootstrap, sub)
// with sub = name_key(measure) only: the same resamples for every target, assurance and criterion
// and for every strategy and logged budget of a measure, and for every scenario of a sweep
// (common random numbers; cells with the same pairs are resampled with the same pairs), so
// identical rows give identical answers and answers differ only through the data and the target.
//
// Unconfirmed: the share of the cell's run records (this strategy and logged budget, every pilot
// budget of the grid, whatever the measure's value) with `confirmed` false: fits whose best
// objective no second EM start reached (fit.hpp), so a better optimum may exist.
//
// Savings: saved_vs_pilot_only = needed(pilot-only) - needed(strategy, N_L), for pooled and
// regime-aware only. Pilot-only ignores logged data: its answer at the same logged budget is used
// when pilot-only records exist there, otherwise its answer at the smallest logged budget that has
// records. exchange_rate = saved / N_L, empty when N_L = 0. Infinite needs give +-infinity; both
// infinite, or either unknown, give empty.
#pragma once
#include <cstdint>
#include <optional>
#include <string_view>
#include <vector>

#include "core/answer/learning_curve.hpp"
#include "core/measures/measure.hpp"
#include "core/running/run_record.hpp"
#include "core/running/settings.hpp"
#include "core/fitting/strategy.hpp"

namespace dobudget {

enum class Criterion { assurance, mean };

constexpr std::string_view name(Criterion c) {
  switch (c) {
    case Criterion::assurance: return "assurance";
    case Criterion::mean: return "mean";
  }
  return "?";
}

inline std::optional<Criterion> parse_criterion(std::string_view s) {
  for (Criterion k : {Criterion::assurance, Criterion::mean})
    if (name(k) == s) return k;
  return std::nullopt;
}

enum class AnswerStatus { met_at_smallest, reached, extrapolated, unreachable, not_reached };

constexpr std::string_view name(AnswerStatus s) {
  switch (s) {
    case AnswerStatus::met_at_smallest: return "met-at-smallest";
    case AnswerStatus::reached: return "reached";
    case AnswerStatus::extrapolated: return "extrapolated";
    case AnswerStatus::unreachable: return "unreachable";
    case AnswerStatus::not_reached: return "not-reached";
  }
  return "?";
}

inline std::optional<AnswerStatus> parse_answer_status(std::string_view s) {
  for (AnswerStatus k : {AnswerStatus::met_at_smallest, AnswerStatus::reached, AnswerStatus::extrapolated,
                         AnswerStatus::unreachable, AnswerStatus::not_reached})
    if (name(k) == s) return k;
  return std::nullopt;
}

struct AnswerQuery {
  Measure measure = Measure::model_kl;
  double target = 0.02;     // epsilon
  double assurance = 0.8;   // beta, in (0, 1]; unused by Criterion::mean
  Criterion criterion = Criterion::assurance;
  int bootstrap = 1000;     // resamples B; 0 disables the interval (low = high = NaN)
  double interval = 0.90;   // coverage of the percentile interval, in (0, 1)
  LearningCurveOptions curve{};
};

struct AnswerRow {
  int scenario = 0;
  Measure measure = Measure::model_kl;
  double target = 0.0;
  double assurance = 0.0;  // NaN under Criterion::mean (not used)
  Criterion criterion = Criterion::assurance;
  Strategy strategy = Strategy::pilot_only;
  int logged = 0;
  double needed_pilot = 0.0;  // +inf: unreachable; NaN: not-reached (unknown)
  double low = 0.0;           // percentile interval; +inf allowed; NaN when bootstrap == 0
  double high = 0.0;
  AnswerStatus status = AnswerStatus::reached;
  std::optional<double> floor;                // fitted c, whenever a learning curve was fitted
  std::optional<double> saved_vs_pilot_only;  // pooled and regime-aware only
  std::optional<double> exchange_rate;        // saved / logged; empty when logged == 0
  int pairs = 0;                              // (draw, replicate) pairs with a value
  std::optional<double> unconfirmed;          // share of the cell's fits (records on the grid) whose
                                              // best optimum no second EM start reached (fit.hpp)
  double interval = 0.90;                     // coverage of [low, high] (not a CSV column)
  int draws = 0;  // environment draws among the pairs (CSV column `draws`)
  // Not CSV columns:
  bool family_draws = true;  // the draws come from the synthetic family (false: a given model, one world)
  double smallest = 0.0;     // the smallest pilot budget with data in the cell
  double bracket_low = 0.0;  // the simulated budgets around the point estimate's crossing (see Interval)
  double bracket_high = 0.0;
  double sampling_low = 0.0;  // sampling part of the interval only (see Interval); NaN when bootstrap == 0
  double sampling_high = 0.0;
  // Issue 13. The scenario's pilot policy (CSV column `pilot_policy`, appended last), and the
  // interpolated need of every bootstrap resample in resample order (+infinity for unreachable or
  // not-reached; empty when bootstrap == 0; not a CSV column): resamples are the same pairs for
  // every scenario of a study, so two scenarios' k-th entries are paired (pilot_choice.hpp).
  PilotPolicyKind pilot_policy = PilotPolicyKind::uniform;
  std::vector<double> resampled_needs;
};

// The interval's half-width relative to the needed budget, (high - low) / 2 / needed_pilot:
// +infinity when an end or the need is infinite, the need is 0 with an interval wider than a
// point, or any of them is NaN (no interval).
double relative_half_width(const AnswerRow& row);

// Whether the answer is known to the stated relative precision: relative_half_width <= relative.
// What a search for that precision reads from a row that does not meet it: budgets next to the
// crossing are missing when the point's bracket alone is too wide, (bracket_high - bracket_low) /
// 2 / needed_pilot > relative (simulate budgets inside (bracket_low, bracket_high); below the
// smallest budget, down to 0, when met-at-smallest; above the largest when extrapolated,
// unreachable or not-reached); more draws or replicates are needed when the sampling part alone
// is too wide, (sampling_high - sampling_low) / 2 / needed_pilot > relative (draws when `draws` is
// small: the spread between worlds dominates on the model class, DEVELOPERS.md "Answer").
bool meets_precision(const AnswerRow& row, double relative);

// Fewer environment draws than this, and the printed table and answer.md warn that the interval
// understates the spread between worlds (synthetic family only: a given model is one world).
inline constexpr int few_draws = 10;

// One query per measure of the scenario that has a target, with the scenario's assurance and
// the assurance criterion (the study's defaults).
std::vector<AnswerQuery> default_queries(const ScenarioSettings& settings);

// All answers of one scenario. Records of other scenarios are ignored; the grid is
// settings.pilot_budgets (sorted), the cells settings.strategies x settings.logged_budgets.
// Output order: query (as given), strategy (settings' order), logged ascending; cells without
// any value are skipped. Deterministic for a given (rows, settings, queries, study_seed),
// whatever the order of `rows`. Throws std::invalid_argument on a malformed query.
std::vector<AnswerRow> compute_answers(const std::vector<RunRecord>& rows, int scenario,
                                       const ScenarioSettings& settings, const std::vector<AnswerQuery>& queries,
                                       std::uint64_t study_seed);

}  // namespace dobudget

namespace dobudget {

// What `dobudget answer` may change without simulating again: targets (replacing the study's,
// measure by measure), the assurance, the criterion and the number of bootstrap resamples.
struct AnswerOverrides {
  std::map<Measure, double> targets;
  std::optional<double> assurance;
  std::optional<Criterion> criterion;
  std::optional<int> bootstrap;
};

// Answers of every scenario of a study, scenario by scenario (default_queries with overrides).
std::vector<AnswerRow> compute_study_answers(const Study& study, const std::vector<RunRecord>& rows,
                                             const AnswerOverrides& overrides = {});

}  // namespace dobudget
