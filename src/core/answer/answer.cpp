// The answer: needed pilot episodes with assurance, bootstrap intervals and floors; see answer.hpp.
#include "core/answer/answer.hpp"

#include <algorithm>
#include <boost/random/uniform_int_distribution.hpp>
#include <cmath>
#include <limits>
#include <map>
#include <span>
#include <stdexcept>
#include <string>
#include <tuple>
#include <utility>

#include "core/answer/isotonic.hpp"
#include "core/world/seeding.hpp"

namespace dobudget {

namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
// Slack for comparing a computed fraction or mean with the level it must reach: pooled means
// carry rounding error of a few ulps.
constexpr double kTol = 1e-12;
constexpr double kHuge = 1e290;

std::optional<double> measure_of(const RunRecord& r, Measure m) {
  switch (m) {
    case Measure::model_kl: return r.model_kl;
    case Measure::return_gap: return r.return_gap;
  }
  return std::nullopt;
}

// The values of one measure for one (strategy, logged) cell: pairs x budgets.
struct Cell {
  std::size_t pairs = 0;
  std::vector<std::vector<std::uint32_t>> draw_pairs;  // the pairs of each environment draw
  std::vector<double> budgets;            // the grid, ascending
  std::vector<double> value;              // pairs x budgets, row-major; NaN when missing
  std::vector<std::vector<std::uint32_t>> sorted;  // per budget: pairs with a value, by value
};

struct Outcome {
  double needed = kNaN;
  AnswerStatus status = AnswerStatus::not_reached;
  std::optional<double> floor;
  double bracket_low = 0.0, bracket_high = kInf;  // where the crossing lies (answer.hpp, Interval)
  double smallest = kNaN;                         // the smallest budget with data
};

// Evaluates the answer for pair multiplicities `counts` (all ones: the data; a bootstrap resample
// otherwise). Holds every scratch buffer, so evaluating allocates nothing after construction.
class Evaluator {
 public:
  Evaluator(const Cell& cell, const AnswerQuery& q) : cell_(cell), q_(q) {
    const std::size_t k = cell.budgets.size();
    // Branch-free forms of the cell: presence (0/1), value (0 when missing), success (0/1).
    has_.resize(cell.value.size());
    value0_.resize(cell.value.size());
    success_.resize(cell.value.size());
    for (std::size_t i = 0; i < cell.value.size(); ++i) {
      const bool present = !std::isnan(cell.value[i]);
      has_[i] = present ? 1.0 : 0.0;
      // An infinite measure (a model giving probability 0) counts as a failure under `assurance`;
      // for sums it is clamped to a huge finite value so means, pooling and fits stay defined.
      value0_[i] = present ? std::clamp(cell.value[i], -kHuge, kHuge) : 0.0;
      success_[i] = present && cell.value[i] <= q.target ? 1.0 : 0.0;
    }
    for (auto* v : {&weight_, &sum_, &hits_, &n_, &stat_, &w_, &mono_, &mean_, &curve_y_, &curve_var_, &curve_w_})
      v->resize(k);
    index_.resize(k);
    ws_.block_value.reserve(k);
    ws_.block_weight.reserve(k);
    ws_.block_end.reserve(k);
  }

  Outcome operator()(std::span<const int> counts) {
    const std::size_t kb = cell_.budgets.size();
    std::fill(weight_.begin(), weight_.end(), 0.0);
    std::fill(sum_.begin(), sum_.end(), 0.0);
    std::fill(hits_.begin(), hits_.end(), 0.0);
    for (std::size_t p = 0; p < cell_.pairs; ++p) {
      if (counts[p] == 0) continue;
      const double c = counts[p];
      const double* has = &has_[p * kb];
      const double* v = &value0_[p * kb];
      const double* ok = &success_[p * kb];
      for (std::size_t k = 0; k < kb; ++k) {
        weight_[k] += c * has[k];
        sum_[k] += c * v[k];
        hits_[k] += c * ok[k];
      }
    }
    // Compact grid: the budgets where some pair has a value.
    std::size_t j = 0;
    for (std::size_t k = 0; k < kb; ++k) {
      if (!(weight_[k] > 0.0)) continue;
      index_[j] = k;
      n_[j] = cell_.budgets[k];
      w_[j] = weight_[k];
      stat_[j] = (q_.criterion == Criterion::assurance ? hits_[k] : sum_[k]) / weight_[k];
      ++j;
    }
    const std::size_t m = j;
    Outcome out;
    if (m == 0) return out;
    out.smallest = n_[0];
    const std::span<const double> stat(stat_.data(), m), w(w_.data(), m);
    const std::span<double> mono(mono_.data(), m);
    const bool assurance = q_.criterion == Criterion::assurance;
    if (assurance)
      isotonic_increasing(stat, w, mono, ws_);
    else
      isotonic_decreasing(stat, w, mono, ws_);
    const double level = assurance ? q_.assurance : q_.target;
    auto met = [&](double x) {
      return assurance ? x >= level - kTol : x <= level + kTol * std::max(1.0, std::abs(level));
    };
    for (std::size_t i = 0; i < m; ++i) {
      if (!met(mono[i])) continue;
      if (i == 0) {  // somewhere in [0, n_0]
        out.needed = n_[0];
        out.status = AnswerStatus::met_at_smallest;
        out.bracket_low = 0.0;
        out.bracket_high = n_[0];
        return out;
      }
      // Linear interpolation in log n between grid points i-1 and i (linear in n from budget 0).
      const double t = std::clamp((level - mono[i - 1]) / (mono[i] - mono[i - 1]), 0.0, 1.0);
      const double n0 = n_[i - 1], n1 = n_[i];
      out.needed = n0 > 0.0 ? std::exp(std::log(n0) + t * (std::log(n1) - std::log(n0))) : t * n1;
      out.status = AnswerStatus::reached;
      out.bracket_low = n0;
      out.bracket_high = n1;
      return out;
    }
    Outcome far = extrapolate(counts, m);
    far.smallest = n_[0];
    far.bracket_low = n_[m - 1];  // beyond the largest budget
    far.bracket_high = far.status == AnswerStatus::extrapolated ? far.needed : kInf;
    return far;
  }

 private:
  // The largest budget falls short: fit e(n) = c + a n^-b to the per-budget statistic
  // (beta-quantile or mean) with inverse-variance weights.
  Outcome extrapolate(std::span<const int> counts, std::size_t m) {
    const std::size_t kb = cell_.budgets.size();
    const bool assurance = q_.criterion == Criterion::assurance;
    // Replicate variances at the compact budgets, two-pass (no cancellation), one sweep over pairs.
    std::fill(curve_var_.begin(), curve_var_.end(), 0.0);
    for (std::size_t j = 0; j < m; ++j) mean_[j] = sum_[index_[j]] / weight_[index_[j]];
    for (std::size_t p = 0; p < cell_.pairs; ++p) {
      if (counts[p] == 0) continue;
      const double c = counts[p];
      const double* has = &has_[p * kb];
      const double* v = &value0_[p * kb];
      for (std::size_t j = 0; j < m; ++j) {
        const std::size_t k = index_[j];
        const double d = v[k] - mean_[j];
        curve_var_[j] += c * has[k] * d * d;
      }
    }
    for (std::size_t j = 0; j < m; ++j) {
      const std::size_t k = index_[j];
      curve_var_[j] = weight_[k] >= 2.0 ? curve_var_[j] / (weight_[k] - 1.0) : kNaN;
      if (assurance) {
        // Inverse empirical distribution: the value at which the cumulative count first reaches
        // need = ceil(beta W) (the integer form of F >= beta, with the same slack as the fraction).
        // Walked from the nearer end of the sorted list.
        const auto total = static_cast<long>(weight_[k]);
        const long need = std::max(1L, static_cast<long>(std::ceil((q_.assurance - kTol) * weight_[k])));
        const auto& order = cell_.sorted[k];
        double q = kNaN;
        if (2 * need <= total) {
          long cum = 0;
          for (std::uint32_t p : order) {
            cum += counts[p];
            if (cum >= need) {
              q = value0_[p * kb + k];
              break;
            }
          }
        } else {
          long above = 0;  // counts strictly above the current entry
          for (auto it = order.rbegin(); it != order.rend(); ++it) {
            const long c = counts[*it];
            if (c > 0 && total - above - c < need) {
              q = value0_[*it * kb + k];
              break;
            }
            above += c;
          }
        }
        curve_y_[j] = q;
      } else {
        curve_y_[j] = mean_[j];
      }
    }
    const std::span<const double> n(n_.data(), m), y(curve_y_.data(), m), var(curve_var_.data(), m),
        wt(w_.data(), m);
    const std::span<double> cw(curve_w_.data(), m);
    inverse_variance_weights(var, wt, cw);
    Outcome out;
    const auto curve = fit_learning_curve(n, y, cw, q_.curve);
    if (!curve) return out;  // not-reached: no curve, needed unknown
    out.floor = curve->c;
    const auto solved = curve->solve(q_.target);
    if (!solved) {
      out.needed = kInf;
      out.status = AnswerStatus::unreachable;
      return out;
    }
    out.needed = std::max(*solved, n_[m - 1]);
    out.status = AnswerStatus::extrapolated;
    return out;
  }

  const Cell& cell_;
  const AnswerQuery& q_;
  std::vector<double> has_, value0_, success_;
  std::vector<double> weight_, sum_, hits_, n_, stat_, w_, mono_, mean_, curve_y_, curve_var_, curve_w_;
  std::vector<std::size_t> index_;
  IsotonicWorkspace ws_;
};

// Percentile of sorted values by linear interpolation of order statistics (Hyndman and Fan
// definition 7); +infinity absorbs (no inf - inf).
double percentile(const std::vector<double>& sorted, double prob) {
  if (sorted.empty()) return kNaN;
  const double h = (static_cast<double>(sorted.size()) - 1.0) * prob;
  const std::size_t i = static_cast<std::size_t>(std::floor(h));
  const double frac = h - static_cast<double>(i);
  const double x0 = sorted[i];
  if (frac == 0.0 || i + 1 >= sorted.size()) return x0;
  const double x1 = sorted[i + 1];
  if (std::isinf(x0) || std::isinf(x1)) return kInf;
  return x0 + frac * (x1 - x0);
}

// The order statistic at Hyndman and Fan definition 7's position (n - 1) prob, rounded down
// (`outwards` towards the lower end) or up: always one of the values, never between two.
double outer_order_statistic(const std::vector<double>& sorted, double prob, bool up) {
  if (sorted.empty()) return kNaN;
  const double h = (static_cast<double>(sorted.size()) - 1.0) * prob;
  const auto i = static_cast<std::size_t>(up ? std::ceil(h - 1e-9) : std::floor(h + 1e-9));
  return sorted[std::min(i, sorted.size() - 1)];
}

struct CellResult {
  Outcome point;
  double low = kNaN, high = kNaN;
  double sampling_low = kNaN, sampling_high = kNaN;
  int pairs = 0;
  int draws = 0;
  std::vector<double> resampled_needs;  // in resample order (AnswerRow::resampled_needs)
};

CellResult answer_cell(const Cell& cell, const AnswerQuery& q, std::uint64_t study_seed, int scenario,
                       Strategy strategy, int logged) {
  Evaluator evaluate(cell, q);
  std::vector<int> counts(cell.pairs, 1);
  CellResult res;
  res.pairs = static_cast<int>(cell.pairs);
  res.draws = static_cast<int>(cell.draw_pairs.size());
  res.point = evaluate(counts);
  if (q.bootstrap <= 0) return res;
  // The same resamples for every strategy and logged budget: identical rows give identical answers,
  // and differences between strategies are paired (common random numbers).
  const std::uint64_t sub = name_key(name(q.measure));
  Engine engine = make_engine(unit_stream_key(study_seed, scenario, 0, 0), Purpose::bootstrap, sub);
  const auto draws = static_cast<std::uint32_t>(cell.draw_pairs.size());
  boost::random::uniform_int_distribution<std::uint32_t> pick_draw(0, draws - 1);
  const auto b = static_cast<std::size_t>(q.bootstrap);
  std::vector<double> needed(b), lower(b), upper(b);
  for (std::size_t k = 0; k < b; ++k) {
    // Two stages: draws with replacement, then replicates with replacement within each drawn world.
    std::fill(counts.begin(), counts.end(), 0);
    for (std::uint32_t i = 0; i < draws; ++i) {
      const auto& own = cell.draw_pairs[draws == 1 ? 0 : pick_draw(engine)];
      boost::random::uniform_int_distribution<std::uint32_t> pick(0, static_cast<std::uint32_t>(own.size() - 1));
      for (std::size_t r = 0; r < own.size(); ++r) ++counts[own[own.size() == 1 ? 0 : pick(engine)]];
    }
    const Outcome o = evaluate(counts);
    needed[k] = std::isnan(o.needed) ? kInf : o.needed;  // not-reached resamples count as unreachable
    lower[k] = o.bracket_low;
    upper[k] = o.bracket_high;
  }
  res.resampled_needs = needed;
  std::sort(needed.begin(), needed.end());
  std::sort(lower.begin(), lower.end());
  std::sort(upper.begin(), upper.end());
  const double alpha = (1.0 - q.interval) / 2.0;
  res.sampling_low = percentile(needed, alpha);
  res.sampling_high = percentile(needed, 1.0 - alpha);
  res.low = outer_order_statistic(lower, alpha, false);
  res.high = outer_order_statistic(upper, 1.0 - alpha, true);
  return res;
}

void validate(const AnswerQuery& q) {
  if (!std::isfinite(q.target)) throw std::invalid_argument("answer: target must be finite");
  if (q.criterion == Criterion::assurance && !(q.assurance > 0.0 && q.assurance <= 1.0))
    throw std::invalid_argument("answer: assurance must be in (0, 1]");
  if (q.bootstrap < 0) throw std::invalid_argument("answer: bootstrap resamples must be >= 0");
  if (!(q.interval > 0.0 && q.interval < 1.0)) throw std::invalid_argument("answer: interval must be in (0, 1)");
}

std::optional<double> saved(double reference, double needed) {
  if (std::isnan(reference) || std::isnan(needed)) return std::nullopt;
  if (std::isinf(reference) && std::isinf(needed)) return std::nullopt;
  return reference - needed;
}

}  // namespace

double relative_half_width(const AnswerRow& row) {
  const double width = row.high - row.low;  // NaN with no interval, +inf (or NaN) with an infinite end
  if (std::isnan(width) || std::isnan(row.needed_pilot) || std::isinf(width) || std::isinf(row.needed_pilot)) return kInf;
  if (row.needed_pilot <= 0.0) return width > 0.0 ? kInf : 0.0;
  return width / 2.0 / row.needed_pilot;
}

bool meets_precision(const AnswerRow& row, double relative) { return relative_half_width(row) <= relative; }

std::vector<AnswerQuery> default_queries(const ScenarioSettings& settings) {
  std::vector<AnswerQuery> out;
  for (Measure m : settings.measures) {
    const auto it = settings.targets.find(m);
    if (it == settings.targets.end()) continue;
    AnswerQuery q;
    q.measure = m;
    q.target = it->second;
    q.assurance = settings.assurance;
    q.criterion = Criterion::assurance;
    out.push_back(q);
  }
  return out;
}

std::vector<AnswerRow> compute_answers(const std::vector<RunRecord>& rows, int scenario,
                                       const ScenarioSettings& settings, const std::vector<AnswerQuery>& queries,
                                       std::uint64_t study_seed) {
  for (const auto& q : queries) validate(q);

  std::vector<double> grid;
  for (int b : settings.pilot_budgets)
    if (b >= 0) grid.push_back(b);
  std::sort(grid.begin(), grid.end());
  grid.erase(std::unique(grid.begin(), grid.end()), grid.end());
  std::vector<int> logged_budgets = settings.logged_budgets;
  std::sort(logged_budgets.begin(), logged_budgets.end());
  logged_budgets.erase(std::unique(logged_budgets.begin(), logged_budgets.end()), logged_budgets.end());

  // The records of this scenario, grouped by (strategy, logged); budgets off the grid are ignored.
  std::map<std::pair<Strategy, int>, std::vector<const RunRecord*>> groups;
  for (const auto& r : rows) {
    if (r.scenario != scenario) continue;
    if (!std::binary_search(grid.begin(), grid.end(), static_cast<double>(r.pilot))) continue;
    groups[{r.strategy, r.logged}].push_back(&r);
  }

  // Cells are built once per (measure, strategy, logged) and shared by the queries on that measure.
  std::map<std::tuple<Measure, Strategy, int>, Cell> cells;
  auto cell_for = [&](Measure measure, Strategy strategy, int logged) -> const Cell* {
    const auto key = std::make_tuple(measure, strategy, logged);
    if (auto it = cells.find(key); it != cells.end()) return &it->second;
    Cell cell;
    cell.budgets = grid;
    const auto g = groups.find({strategy, logged});
    if (g != groups.end()) {
      std::vector<std::pair<int, int>> ids;
      for (const RunRecord* r : g->second)
        if (const auto v = measure_of(*r, measure); v && !std::isnan(*v)) ids.emplace_back(r->environment, r->replicate);
      std::sort(ids.begin(), ids.end());
      ids.erase(std::unique(ids.begin(), ids.end()), ids.end());
      const std::size_t kb = grid.size();
      cell.pairs = ids.size();
      for (std::uint32_t p = 0; p < cell.pairs; ++p) {  // ids are sorted by draw: one run of pairs per draw
        if (p == 0 || ids[p].first != ids[p - 1].first) cell.draw_pairs.emplace_back();
        cell.draw_pairs.back().push_back(p);
      }
      cell.value.assign(cell.pairs * kb, kNaN);
      for (const RunRecord* r : g->second) {
        const auto v = measure_of(*r, measure);
        if (!v || std::isnan(*v)) continue;  // a NaN measure counts as missing
        const auto p = static_cast<std::size_t>(
            std::lower_bound(ids.begin(), ids.end(), std::make_pair(r->environment, r->replicate)) - ids.begin());
        const auto k = static_cast<std::size_t>(
            std::lower_bound(grid.begin(), grid.end(), static_cast<double>(r->pilot)) - grid.begin());
        double& slot = cell.value[p * kb + k];
        if (!std::isnan(slot))
          throw std::invalid_argument("answer: duplicate run record for scenario " + std::to_string(scenario) +
                                      ", environment " + std::to_string(r->environment) + ", replicate " +
                                      std::to_string(r->replicate) + ", strategy " + std::string(name(strategy)) +
                                      ", logged " + std::to_string(logged) + ", pilot " + std::to_string(r->pilot));
        slot = *v;
      }
      cell.sorted.resize(kb);
      for (std::size_t k = 0; k < kb; ++k) {
        auto& order = cell.sorted[k];
        for (std::uint32_t p = 0; p < cell.pairs; ++p)
          if (!std::isnan(cell.value[p * kb + k])) order.push_back(p);
        std::stable_sort(order.begin(), order.end(), [&](std::uint32_t a, std::uint32_t b) {
          return cell.value[a * kb + k] < cell.value[b * kb + k];
        });
      }
    }
    return &cells.emplace(key, std::move(cell)).first->second;
  };

  std::vector<AnswerRow> out;
  for (const auto& q : queries) {
    const std::size_t first = out.size();
    for (Strategy s : settings.strategies) {
      for (int logged : logged_budgets) {
        const Cell* cell = cell_for(q.measure, s, logged);
        if (cell->pairs == 0) continue;
        const CellResult res = answer_cell(*cell, q, study_seed, scenario, s, logged);
        AnswerRow row;
        row.scenario = scenario;
        row.measure = q.measure;
        row.target = q.target;
        row.assurance = q.criterion == Criterion::assurance ? q.assurance : kNaN;
        row.criterion = q.criterion;
        row.strategy = s;
        row.logged = logged;
        row.needed_pilot = res.point.needed;
        row.low = res.low;
        row.high = res.high;
        row.status = res.point.status;
        row.floor = res.point.floor;
        row.pairs = res.pairs;
        row.interval = q.interval;
        row.draws = res.draws;
        row.family_draws = !settings.environment.given.has_value();
        row.smallest = res.point.smallest;
        row.bracket_low = res.point.bracket_low;
        row.bracket_high = res.point.bracket_high;
        row.sampling_low = res.sampling_low;
        row.sampling_high = res.sampling_high;
        row.pilot_policy = settings.pilot.policy;
        row.resampled_needs = res.resampled_needs;
        if (const auto g = groups.find({s, logged}); g != groups.end()) {
          // Of the rows with a fit (a cell with no data has none: starts 0), those whose best
          // optimum no second start reached.
          std::size_t fitted = 0, open = 0;
          for (const RunRecord* r : g->second)
            if (r->starts > 0) ++fitted, open += r->confirmed ? 0 : 1;
          if (fitted > 0) row.unconfirmed = static_cast<double>(open) / static_cast<double>(fitted);
        }
        out.push_back(row);
      }
    }
    // Savings against pilot-only: same logged budget if present, else its smallest logged budget.
    for (std::size_t i = first; i < out.size(); ++i) {
      AnswerRow& row = out[i];
      if (row.strategy == Strategy::pilot_only) continue;
      const AnswerRow* ref = nullptr;
      for (std::size_t j = first; j < out.size(); ++j) {
        const AnswerRow& cand = out[j];
        if (cand.strategy != Strategy::pilot_only) continue;
        if (cand.logged == row.logged) {
          ref = &cand;
          break;
        }
        if (!ref || cand.logged < ref->logged) ref = &cand;
      }
      if (!ref) continue;
      row.saved_vs_pilot_only = saved(ref->needed_pilot, row.needed_pilot);
      if (row.saved_vs_pilot_only && row.logged > 0) row.exchange_rate = *row.saved_vs_pilot_only / row.logged;
    }
  }
  return out;
}

}  // namespace dobudget

namespace dobudget {

std::vector<AnswerRow> compute_study_answers(const Study& study, const std::vector<RunRecord>& rows,
                                             const AnswerOverrides& ov) {
  std::vector<AnswerRow> out;
  for (const auto& sc : study.scenarios) {
    ScenarioSettings s = sc.settings;
    for (const auto& [m, t] : ov.targets) s.targets[m] = t;
    if (ov.assurance) s.assurance = *ov.assurance;
    std::vector<AnswerQuery> queries = default_queries(s);
    for (auto& q : queries) {
      if (ov.criterion) q.criterion = *ov.criterion;
      if (ov.bootstrap) q.bootstrap = *ov.bootstrap;
    }
    auto a = compute_answers(rows, sc.index, s, queries, study.seed);
    out.insert(out.end(), a.begin(), a.end());
  }
  return out;
}

}  // namespace dobudget
