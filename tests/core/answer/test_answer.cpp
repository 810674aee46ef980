// The answer: needed pilot episodes, intervals, statuses, savings; src/core/answer/answer.hpp.
#include <catch2/catch.hpp>

#include "../run_records.hpp"

#include <algorithm>
#include <boost/math/distributions/normal.hpp>
#include <boost/random/mersenne_twister.hpp>
#include <boost/random/normal_distribution.hpp>
#include <boost/random/uniform_01.hpp>
#include <chrono>
#include <cmath>
#include <limits>
#include <vector>

#include "core/answer/answer.hpp"

using namespace dobudget;

namespace {

const std::vector<int> kGrid{10, 30, 100, 300, 1000};
constexpr double kInfinity = std::numeric_limits<double>::infinity();

RunRecord record(int env, int rep, Strategy s, int logged, int pilot, std::optional<double> kl) {
  return test::make_record(0, env, rep, s, logged, pilot, kl);
}

ScenarioSettings settings_for(std::vector<Strategy> strategies, std::vector<int> logged,
                              std::vector<int> pilot = kGrid) {
  ScenarioSettings s;
  s.strategies = std::move(strategies);
  s.logged_budgets = std::move(logged);
  s.pilot_budgets = std::move(pilot);
  s.measures = {Measure::model_kl};
  return s;
}

AnswerQuery query(double target, double assurance, Criterion c = Criterion::assurance, int bootstrap = 200) {
  AnswerQuery q;
  q.measure = Measure::model_kl;
  q.target = target;
  q.assurance = assurance;
  q.criterion = c;
  q.bootstrap = bootstrap;
  return q;
}

// Ten pairs; at budget k pair j succeeds (value 0, else 1) iff j < successes[k]: the success
// fraction is exactly successes[k] / 10 and already monotone.
std::vector<RunRecord> counted(const std::vector<int>& successes, Strategy s = Strategy::pilot_only, int logged = 0,
                               int pairs = 10) {
  std::vector<RunRecord> rows;
  for (int j = 0; j < pairs; ++j)
    for (std::size_t k = 0; k < kGrid.size(); ++k)
      rows.push_back(record(j / 2, j % 2, s, logged, kGrid[k], j < successes[k] ? 0.0 : 1.0));
  return rows;
}

}  // namespace

TEST_CASE("answer: assurance crossing has the hand-computed closed form", "[answer]") {
  // Success fractions 0.1, 0.3, 0.6, 0.9, 1.0 at 10, 30, 100, 300, 1000; beta = 0.8.
  // docs/design.md, "Needed pilot episodes" (log-linear interpolation), by hand: the crossing lies between 100 (0.6) and
  // 300 (0.9), t = (0.8 - 0.6) / (0.9 - 0.6) = 2/3, n = exp(log 100 + 2/3 log 3) = 100 * 3^(2/3).
  const auto rows = counted({1, 3, 6, 9, 10});
  const auto out = compute_answers(rows, 0, settings_for({Strategy::pilot_only}, {0}), {query(0.5, 0.8)}, 1);
  REQUIRE(out.size() == 1);
  CHECK(out[0].status == AnswerStatus::reached);
  CHECK(out[0].needed_pilot == Approx(100.0 * std::cbrt(9.0)).epsilon(1e-12));
  CHECK(out[0].pairs == 10);
  CHECK(out[0].low <= out[0].needed_pilot);
  CHECK(out[0].high >= out[0].needed_pilot);
  CHECK_FALSE(out[0].floor);

  // A violation of monotonicity is pooled first (docs/design.md, "Needed pilot episodes", isotonic regression), by hand:
  // fractions 0.1, 0.7, 0.5, 0.9, 1.0 pool (0.7, 0.5) -> 0.6, 0.6 (equal weights). Then the first
  // budget where the monotone curve reaches 0.8 is 300, from 0.6 at 100: again 100 * 3^(2/3).
  const auto pooled = counted({1, 7, 5, 9, 10});
  const auto out2 = compute_answers(pooled, 0, settings_for({Strategy::pilot_only}, {0}), {query(0.5, 0.8)}, 1);
  REQUIRE(out2.size() == 1);
  CHECK(out2[0].needed_pilot == Approx(100.0 * std::cbrt(9.0)).epsilon(1e-12));

  // beta = 0.6 on the same data, by hand: the pooled curve is 0.1, 0.6, 0.6, 0.9, 1.0, so the
  // first budget reaching 0.6 is 30, with 0.1 at 10 before it: t = (0.6 - 0.1) / (0.6 - 0.1) = 1,
  // n = 30.
  const auto out3 = compute_answers(pooled, 0, settings_for({Strategy::pilot_only}, {0}), {query(0.5, 0.6)}, 1);
  CHECK(out3[0].needed_pilot == Approx(30.0).epsilon(1e-12));
}

TEST_CASE("answer: mean criterion on an exactly sampled curve c + a/n", "[answer]") {
  // Every pair has exactly e(n) = 0.01 + 1/n: e = 0.11, 0.04333, 0.02, 0.013333, 0.011.
  // By hand (docs/design.md, "Needed pilot episodes", interpolation in log n): target 0.015 lies between 100 (0.02) and
  // 300 (0.01333): t = (0.015 - 0.02) / (0.013333 - 0.02) = 0.75, n = 100 * 3^0.75.
  // Target 0.0105 is below e(1000): extrapolated on the fitted curve, which is exact here, so
  // n = a / (eps - c) = 1 / 0.0005 = 2000 (learning_curve.hpp, solve). Target 0.009 is below the
  // floor 0.01: unreachable with floor 0.01. All pairs identical: every bootstrap resample equals
  // the data, so the sampling part of the interval collapses onto the point, while the interval
  // still spans the simulated budgets around the crossing, [100, 300] (answer.hpp, Interval).
  std::vector<RunRecord> rows;
  for (int j = 0; j < 8; ++j)
    for (int n : kGrid) rows.push_back(record(j, 0, Strategy::pilot_only, 0, n, 0.01 + 1.0 / n));
  // Two pairs with no value (e.g. return_gap with no room for planning) change nothing but `pairs`.
  for (int n : kGrid) rows.push_back(record(100, 0, Strategy::pilot_only, 0, n, std::nullopt));
  for (int n : kGrid) rows.push_back(record(101, 0, Strategy::pilot_only, 0, n, std::nullopt));
  const auto settings = settings_for({Strategy::pilot_only}, {0});
  const auto out = compute_answers(rows, 0, settings,
                                   {query(0.015, 0.8, Criterion::mean), query(0.0105, 0.8, Criterion::mean),
                                    query(0.009, 0.8, Criterion::mean)},
                                   3);
  REQUIRE(out.size() == 3);
  CHECK(out[0].status == AnswerStatus::reached);
  CHECK(out[0].needed_pilot == Approx(100.0 * std::pow(3.0, 0.75)).epsilon(1e-9));
  CHECK(out[0].sampling_low == Approx(out[0].needed_pilot).epsilon(1e-12));
  CHECK(out[0].sampling_high == Approx(out[0].needed_pilot).epsilon(1e-12));
  CHECK(out[0].low == 100.0);
  CHECK(out[0].high == 300.0);
  CHECK(out[0].bracket_low == 100.0);
  CHECK(out[0].bracket_high == 300.0);
  CHECK(out[0].pairs == 8);
  CHECK(out[0].draws == 8);  // record(j, 0, ...): every pair its own draw
  CHECK(std::isnan(out[0].assurance));  // not used by the mean criterion
  CHECK(out[0].criterion == Criterion::mean);

  CHECK(out[1].status == AnswerStatus::extrapolated);
  CHECK(out[1].needed_pilot == Approx(2000.0).epsilon(1e-4));
  CHECK(out[1].low == 1000.0);  // beyond the largest simulated budget, up to the extrapolated need
  CHECK(out[1].high == Approx(2000.0).epsilon(1e-4));
  REQUIRE(out[1].floor);
  CHECK(*out[1].floor == Approx(0.01).epsilon(1e-6));

  CHECK(out[2].status == AnswerStatus::unreachable);
  CHECK(std::isinf(out[2].needed_pilot));
  CHECK(std::isinf(out[2].high));
  REQUIRE(out[2].floor);
  CHECK(*out[2].floor == Approx(0.01).epsilon(1e-6));
}

TEST_CASE("answer: the four statuses from constructed data", "[answer]") {
  const auto settings = settings_for({Strategy::pilot_only}, {0});
  SECTION("met-at-smallest") {
    // Every pair meets the target at every budget: needed = smallest budget (an upper bound), and
    // the crossing may lie anywhere in [0, 10], so the interval reaches 0 (answer.hpp, Interval):
    // not [10, 10], which would read as certainty.
    const auto out = compute_answers(counted({10, 10, 10, 10, 10}), 0, settings, {query(0.5, 0.8)}, 1);
    REQUIRE(out.size() == 1);
    CHECK(out[0].status == AnswerStatus::met_at_smallest);
    CHECK(out[0].needed_pilot == 10.0);
    CHECK(out[0].low == 0.0);
    CHECK(out[0].high == 10.0);
    CHECK(out[0].smallest == 10.0);
    CHECK_FALSE(meets_precision(out[0], 0.1));  // (10 - 0) / 2 / 10 = 0.5
  }
  SECTION("reached") {
    const auto out = compute_answers(counted({0, 2, 5, 8, 10}), 0, settings, {query(0.5, 0.8)}, 1);
    CHECK(out[0].status == AnswerStatus::reached);
    CHECK(out[0].needed_pilot == Approx(300.0).epsilon(1e-12));  // 0.8 reached exactly at 300
  }
  // Pairs with e(n) = c + a n^-b times a log-normal factor, 200 pairs; the 0.8-quantile at 1000 is
  // about c + 0.0316 exp(0.3 * 0.84) > 0.01, so the grid falls short of a target 0.01.
  auto noisy = [](double c) {
    std::vector<RunRecord> rows;
    boost::random::mt19937_64 rng(99);
    boost::random::normal_distribution<double> z;
    for (int j = 0; j < 200; ++j) {
      const double factor = std::exp(0.3 * z(rng));  // a pair-level effect, as for an environment
      for (int n : kGrid) rows.push_back(record(j, 0, Strategy::pilot_only, 0, n, c + factor * std::pow(n, -0.5)));
    }
    return rows;
  };
  SECTION("extrapolated") {
    // Floor 0.004 < target 0.01. Every pair is the same curve up to its factor, so the
    // 0.8-quantile is exactly c + q n^-0.5 with q the 0.8-quantile of the factors; the fit recovers
    // c, and n = (q / (0.01 - 0.004))^2 (learning_curve.hpp, solve), compared within 1%.
    const auto rows = noisy(0.004);
    std::vector<double> factors;
    for (const auto& r : rows)
      if (r.pilot == 10) factors.push_back((*r.model_kl - 0.004) * std::sqrt(10.0));
    std::sort(factors.begin(), factors.end());
    const double q = factors[static_cast<std::size_t>(std::ceil(0.8 * 200)) - 1];  // inverse ECDF
    const auto out = compute_answers(rows, 0, settings, {query(0.01, 0.8)}, 1);
    REQUIRE(out.size() == 1);
    CHECK(out[0].status == AnswerStatus::extrapolated);
    REQUIRE(out[0].floor);
    CHECK(*out[0].floor == Approx(0.004).margin(1e-6));
    CHECK(out[0].needed_pilot == Approx(std::pow(q / 0.006, 2.0)).epsilon(0.01));
    CHECK(out[0].needed_pilot > 1000.0);
    CHECK(out[0].low <= out[0].needed_pilot);
    CHECK(out[0].high >= out[0].needed_pilot);
  }
  SECTION("unreachable") {
    // Floor 0.05 >= target 0.02: unreachable, floor reported, needed and the upper end infinite.
    const auto out = compute_answers(noisy(0.05), 0, settings, {query(0.02, 0.8)}, 1);
    REQUIRE(out.size() == 1);
    CHECK(out[0].status == AnswerStatus::unreachable);
    CHECK(std::isinf(out[0].needed_pilot));
    CHECK(std::isinf(out[0].high));
    REQUIRE(out[0].floor);
    CHECK(*out[0].floor == Approx(0.05).margin(1e-6));
  }
  SECTION("not-reached: too few budgets for a curve") {
    const auto out = compute_answers(counted({0, 1, 2, 3, 4}), 0,
                                     settings_for({Strategy::pilot_only}, {0}, {10, 30}), {query(0.5, 0.8)}, 1);
    REQUIRE(out.size() == 1);
    CHECK(out[0].status == AnswerStatus::not_reached);
    CHECK(std::isnan(out[0].needed_pilot));
    CHECK(std::isinf(out[0].high));
  }
}

TEST_CASE("answer: infinite and missing values", "[answer]") {
  // Documented in answer.hpp: +inf is a failure under `assurance`; under `mean` the mean is huge,
  // so the largest budget falls short and the flat fitted curve sits far above the target.
  // nullopt and NaN values are missing: left out of the denominators and of `pairs`.
  std::vector<RunRecord> rows;
  for (int j = 0; j < 10; ++j)
    for (int n : kGrid) rows.push_back(record(j, 0, Strategy::pilot_only, 0, n, j == 0 ? kInfinity : 0.0));
  for (int n : kGrid) rows.push_back(record(20, 0, Strategy::pilot_only, 0, n, std::nan("")));
  for (int n : kGrid) rows.push_back(record(21, 0, Strategy::pilot_only, 0, n, std::nullopt));
  const auto settings = settings_for({Strategy::pilot_only}, {0});
  const auto out = compute_answers(rows, 0, settings, {query(0.5, 0.9), query(0.5, 0.95), query(0.5, 0.8, Criterion::mean)}, 1);
  REQUIRE(out.size() == 3);
  CHECK(out[0].status == AnswerStatus::met_at_smallest);  // 9 of 10 succeed: 0.9 >= 0.9
  CHECK(out[0].pairs == 10);
  CHECK(out[1].status == AnswerStatus::unreachable);  // 0.9 < 0.95 everywhere; the 0.95-quantile is inf
  CHECK(out[2].status == AnswerStatus::unreachable);
  REQUIRE(out[2].floor);
  CHECK(*out[2].floor > 1e200);
}

TEST_CASE("answer: savings against pilot-only and the exchange rate", "[answer]") {
  // pilot-only only at logged 0 (it ignores logged data); pooled at 0 and 1000. By hand
  // (docs/design.md, "Savings and exchange rate"): pilot-only needs 300 (0.8 at 300 exactly); pooled at logged 0 needs 300 too, at 1000
  // it needs 100: saved 200, exchange rate 200 / 1000 = 0.2; at logged 0 no exchange rate.
  auto rows = counted({0, 2, 5, 8, 10}, Strategy::pilot_only, 0);
  for (const auto& r : counted({0, 2, 5, 8, 10}, Strategy::pooled, 0)) rows.push_back(r);
  for (const auto& r : counted({2, 5, 8, 9, 10}, Strategy::pooled, 1000)) rows.push_back(r);
  const auto settings = settings_for({Strategy::pilot_only, Strategy::pooled}, {1000, 0});
  const auto out = compute_answers(rows, 0, settings, {query(0.5, 0.8)}, 1);
  REQUIRE(out.size() == 3);
  CHECK(out[0].strategy == Strategy::pilot_only);
  CHECK(out[0].logged == 0);
  CHECK_FALSE(out[0].saved_vs_pilot_only);
  CHECK(out[1].strategy == Strategy::pooled);
  CHECK(out[1].logged == 0);
  REQUIRE(out[1].saved_vs_pilot_only);
  CHECK(*out[1].saved_vs_pilot_only == Approx(0.0).margin(1e-9));
  CHECK_FALSE(out[1].exchange_rate);
  CHECK(out[2].logged == 1000);
  CHECK(out[2].needed_pilot == Approx(100.0).epsilon(1e-12));
  REQUIRE(out[2].saved_vs_pilot_only);
  CHECK(*out[2].saved_vs_pilot_only == Approx(200.0).epsilon(1e-12));
  REQUIRE(out[2].exchange_rate);
  CHECK(*out[2].exchange_rate == Approx(0.2).epsilon(1e-12));
}

TEST_CASE("answer: deterministic whatever the order of the records", "[answer]") {
  // docs/design.md, "Seeding and reproducibility": results are bit-identical; the record order must not matter.
  auto rows = counted({1, 3, 6, 8, 10}, Strategy::pilot_only, 0, 40);
  const auto settings = settings_for({Strategy::pilot_only}, {0});
  const auto a = compute_answers(rows, 0, settings, {query(0.5, 0.8)}, 11);
  std::reverse(rows.begin(), rows.end());
  std::rotate(rows.begin(), rows.begin() + 17, rows.end());
  const auto b = compute_answers(rows, 0, settings, {query(0.5, 0.8)}, 11);
  REQUIRE(a.size() == 1);
  REQUIRE(b.size() == 1);
  CHECK(a[0].needed_pilot == b[0].needed_pilot);
  CHECK(a[0].low == b[0].low);
  CHECK(a[0].high == b[0].high);
  // Records of another scenario are ignored.
  auto other = rows;
  for (auto& r : other) r.scenario = 1;
  CHECK(compute_answers(other, 0, settings, {query(0.5, 0.8)}, 11).empty());
}

TEST_CASE("answer: bootstrap interval coverage on binomial successes", "[answer]") {
  // Known curve: a pair succeeds at budget n iff U <= p(n) = 1 - exp(-n/100), U ~ Uniform(0, 1) per
  // pair (nested, as the data of docs/design.md, "Seeding and reproducibility"), each pair its own environment draw (so the
  // two-stage bootstrap is the plain pair bootstrap). Two estimands:
  //  * the design's definition applied to the TRUE curve on this grid: p = 0.6321 at 100 and
  //    0.9502 at 300 bracket beta = 0.8, so n_grid = exp(log 100 + (0.8 - p(100)) / (p(300) -
  //    p(100)) * log 3) (about 178.6). The sampling part of the interval (sampling_low/high, the
  //    percentile interval of the interpolated needs; Efron and Tibshirani, "An Introduction to the
  //    Bootstrap", 1993, ch. 13) targets it: accepted coverage [0.80, 0.98];
  //  * the exact crossing, p(n) = 0.8 at n* = 100 ln 5 (about 160.9), which the interpolation on
  //    this coarse grid misses: the interval, which carries where the crossing lies between the
  //    simulated budgets (answer.hpp), must cover it at least nominally: accepted >= 0.84.
  // 200 seeded repetitions, m = 100 pairs, B = 300 resamples, 90% intervals. The binomial standard
  // error of a coverage estimate near 0.9 from 200 repetitions is sqrt(0.9 * 0.1 / 200) = 0.021
  // (Casella and Berger, "Statistical Inference", 2nd ed., 2002, sec. 3.2: the binomial variance
  // n p (1 - p)), so the bands are about -4.7 / +3.8 and -2.9 standard errors around 0.9.
  // Observed: 0.92 for the sampling part, 1.0 for the interval (it spans at least [100, 300]).
  auto p = [](double n) { return 1.0 - std::exp(-n / 100.0); };
  const double t = (0.8 - p(100)) / (p(300) - p(100));
  const double n_grid = std::exp(std::log(100.0) + t * std::log(3.0));
  const double n_exact = 100.0 * std::log(5.0);
  const auto settings = settings_for({Strategy::pilot_only}, {0});
  const int reps = 200, m = 100;
  int covered_sampling = 0, covered = 0;
  for (int rep = 0; rep < reps; ++rep) {
    boost::random::mt19937_64 rng(1000 + rep);
    boost::random::uniform_01<double> u01;
    std::vector<RunRecord> rows;
    for (int j = 0; j < m; ++j) {
      const double u = u01(rng);
      for (int n : kGrid) rows.push_back(record(j, 0, Strategy::pilot_only, 0, n, u <= p(n) ? 0.0 : 1.0));
    }
    const auto out = compute_answers(rows, 0, settings, {query(0.5, 0.8, Criterion::assurance, 300)}, 1 + rep);
    REQUIRE(out.size() == 1);
    REQUIRE(out[0].draws == m);
    if (out[0].sampling_low <= n_grid && n_grid <= out[0].sampling_high) ++covered_sampling;
    if (out[0].low <= n_exact && n_exact <= out[0].high) ++covered;
  }
  const double coverage_sampling = static_cast<double>(covered_sampling) / reps;
  const double coverage = static_cast<double>(covered) / reps;
  INFO("empirical coverage: sampling part " << coverage_sampling << ", interval " << coverage);
  CHECK(coverage_sampling >= 0.80);
  CHECK(coverage_sampling <= 0.98);
  CHECK(coverage >= 0.84);
}

namespace {

// Rows with a known hierarchical structure: pair (d, r) has Z = sigma_b u_d + sigma_w e_dr with
// u, e ~ N(0, 1) independent, and value exp(Z) * 100 / n at budget n; target 1, so it succeeds
// at n iff Z <= log(n / 100). Over the population of worlds and replicates Z ~ N(0, 1) when
// sigma_b^2 + sigma_w^2 = 1, so the success probability is Phi(log(n / 100)) and the true needed
// budget at assurance beta is n* = 100 exp(Phi^-1(beta)), exactly. A fine grid (Hierarchy::ratio)
// keeps the interval's share from the gaps between budgets small beside the sampling part.
// `flat`: every pair labelled as its own draw, so the two-stage bootstrap is the flat pair bootstrap
// on the same values.
struct Hierarchy {
  int draws = 20, replicates = 5;
  double between = 0.8;  // sigma_b^2, the share of the variance between draws
  double ratio = 1.2;    // of consecutive budgets of the grid
};

std::vector<int> fine_grid(double ratio = 1.2) {
  std::vector<int> g;
  for (double n = 10.0; n < 3000.0; n *= ratio)
    if (g.empty() || std::lround(n) > g.back()) g.push_back(static_cast<int>(std::lround(n)));
  return g;
}

std::vector<RunRecord> hierarchical_rows(const Hierarchy& h, const std::vector<int>& grid, std::uint64_t seed,
                                         bool flat) {
  boost::random::mt19937_64 rng(seed);
  boost::random::normal_distribution<double> z;
  std::vector<RunRecord> rows;
  for (int d = 0; d < h.draws; ++d) {
    const double u = std::sqrt(h.between) * z(rng);
    for (int r = 0; r < h.replicates; ++r) {
      const double value = std::exp(u + std::sqrt(1.0 - h.between) * z(rng));
      for (int n : grid)
        rows.push_back(flat ? record(d * h.replicates + r, 0, Strategy::pilot_only, 0, n, value * 100.0 / n)
                            : record(d, r, Strategy::pilot_only, 0, n, value * 100.0 / n));
    }
  }
  return rows;
}

struct Coverage {
  double two_stage = 0.0, flat = 0.0, sampling_two_stage = 0.0, sampling_flat = 0.0;
};

Coverage hierarchical_coverage(const Hierarchy& h, int studies, int bootstrap) {
  const std::vector<int> grid = fine_grid(h.ratio);
  const auto settings = settings_for({Strategy::pilot_only}, {0}, grid);
  const double truth = 100.0 * std::exp(boost::math::quantile(boost::math::normal(), 0.8));
  int two = 0, flat = 0, sampling = 0, sampling_flat = 0;
  for (int k = 0; k < studies; ++k) {
    const auto a = compute_answers(hierarchical_rows(h, grid, 500 + k, false), 0, settings,
                                   {query(1.0, 0.8, Criterion::assurance, bootstrap)}, 1 + k);
    const auto b = compute_answers(hierarchical_rows(h, grid, 500 + k, true), 0, settings,
                                   {query(1.0, 0.8, Criterion::assurance, bootstrap)}, 1 + k);
    REQUIRE(a.size() == 1);
    REQUIRE(b.size() == 1);
    REQUIRE(a[0].draws == h.draws);
    REQUIRE(b[0].draws == h.draws * h.replicates);
    REQUIRE(a[0].needed_pilot == b[0].needed_pilot);  // the same rows, the same point answer
    if (a[0].low <= truth && truth <= a[0].high) ++two;
    if (b[0].low <= truth && truth <= b[0].high) ++flat;
    if (a[0].sampling_low <= truth && truth <= a[0].sampling_high) ++sampling;
    if (b[0].sampling_low <= truth && truth <= b[0].sampling_high) ++sampling_flat;
  }
  return {static_cast<double>(two) / studies, static_cast<double>(flat) / studies,
          static_cast<double>(sampling) / studies, static_cast<double>(sampling_flat) / studies};
}

}  // namespace

TEST_CASE("answer: coverage of the whole answer procedure on rows with a known between-draw spread", "[answer][coverage]") {
  // Hierarchical rows above: 20 draws x 5 replicates, 80% of the variance between draws (like
  // pooled's 0.78-0.88 measured on default-like settings), budgets 10 to 3000 in steps of about
  // 10%, true need n* = 100 exp(Phi^-1(0.8)) (about 232; Phi^-1 from Boost.Math). 300 simulated
  // studies, each answered with B = 200 resamples by the two-stage scheme and, on the same values
  // with every pair its own draw, by the flat one. The binomial standard error of a coverage
  // estimate near 0.9 from 300 studies is sqrt(0.9 * 0.1 / 300) = 0.017 (Casella and Berger,
  // "Statistical Inference", 2nd ed., 2002, sec. 3.2: the binomial variance n p (1 - p));
  // accepted for the two-stage interval: [0.9 - 3 SE - 0.03, 0.9 + 3 SE + 0.03] = [0.82, 0.98]
  // (0.03 for the percentile interval's own small-sample error with 20 worlds, and for the share
  // of the gaps between budgets that the interval carries). The flat scheme resamples replicates
  // of one world as if they were independent and must fall clearly short: below 0.80.
  // Observed when the test was written: two-stage 0.91 (sampling part alone 0.90), flat 0.71
  // (0.62); figures for other sizes: "coverage table" below and DEVELOPERS.md.
  const Coverage c = hierarchical_coverage(Hierarchy{20, 5, 0.8, 1.1}, 300, 200);
  INFO("two-stage " << c.two_stage << ", flat " << c.flat << "; sampling parts: two-stage " << c.sampling_two_stage
                    << ", flat " << c.sampling_flat);
  CHECK(c.two_stage >= 0.82);
  CHECK(c.two_stage <= 0.98);
  CHECK(c.flat < 0.80);
}

TEST_CASE("answer: coverage table for DEVELOPERS.md", "[.][answer_coverage_table]") {
  // Hidden (run with "[answer_coverage_table]"): the figures behind the coverage paragraph.
  for (const Hierarchy h : {Hierarchy{4, 10, 0.8}, Hierarchy{10, 4, 0.8}, Hierarchy{12, 4, 0.8}, Hierarchy{20, 5, 0.8},
                            Hierarchy{40, 5, 0.8}, Hierarchy{20, 5, 0.06}, Hierarchy{20, 5, 0.8, 1.1},
                            Hierarchy{20, 5, 0.8, 1.05}, Hierarchy{20, 5, 0.8, 1.5}}) {
    const Coverage c = hierarchical_coverage(h, 400, 300);
    WARN(h.draws << " draws x " << h.replicates << " replicates, between share " << h.between << ", grid ratio "
                 << h.ratio << ": two-stage "
                 << c.two_stage << ", flat " << c.flat << "; sampling parts: two-stage " << c.sampling_two_stage
                 << ", flat " << c.sampling_flat);
  }
}

TEST_CASE("answer: a jump between two simulated budgets gives an interval reaching both", "[answer]") {
  // No pair meets the target at 300, every pair at 1000 (issue 10's example): the interpolated need
  // is 300 (10/3)^0.8 (about 787), but the crossing may lie anywhere in (300, 1000], and every
  // resample sees the same jump. The interval must reach both budgets (answer.hpp, Interval), so
  // the answer is not within +-10%: (1000 - 300) / 2 / 787 = 0.44.
  const auto out = compute_answers(counted({0, 0, 0, 0, 10}, Strategy::pooled, 3000), 0,
                                   settings_for({Strategy::pooled}, {3000}), {query(0.5, 0.8)}, 1);
  REQUIRE(out.size() == 1);
  CHECK(out[0].status == AnswerStatus::reached);
  CHECK(out[0].needed_pilot == Approx(300.0 * std::pow(10.0 / 3.0, 0.8)).epsilon(1e-12));
  CHECK(out[0].low == 300.0);
  CHECK(out[0].high == 1000.0);
  CHECK(out[0].sampling_low == Approx(out[0].needed_pilot).epsilon(1e-12));  // every resample the same
  CHECK(relative_half_width(out[0]) == Approx(350.0 / out[0].needed_pilot).epsilon(1e-12));
  CHECK_FALSE(meets_precision(out[0], 0.1));
  CHECK(meets_precision(out[0], 0.5));
}

TEST_CASE("answer: two-stage resampling with one draw resamples replicates only", "[answer]") {
  // A given model is one world (answer.hpp, Interval): with one draw the resamples are replicates
  // of that draw, and the interval still varies (it is not the degenerate resample of one world).
  std::vector<RunRecord> rows;
  for (int r = 0; r < 10; ++r)
    for (std::size_t k = 0; k < kGrid.size(); ++k)
      rows.push_back(record(0, r, Strategy::pilot_only, 0, kGrid[k], r < std::vector<int>{1, 3, 6, 9, 10}[k] ? 0.0 : 1.0));
  auto settings = settings_for({Strategy::pilot_only}, {0});
  const auto out = compute_answers(rows, 0, settings, {query(0.5, 0.8)}, 1);
  REQUIRE(out.size() == 1);
  CHECK(out[0].draws == 1);
  CHECK(out[0].pairs == 10);
  CHECK(out[0].sampling_low < out[0].sampling_high);
  CHECK(out[0].family_draws);
  settings.environment.given = Environment{};
  CHECK_FALSE(compute_answers(rows, 0, settings, {query(0.5, 0.8)}, 1)[0].family_draws);
}

TEST_CASE("answer: a pilot budget of 0", "[answer]") {
  // Grid {0, 10, 30, 100}. pooled at logged 1000 meets the target with no pilot data in every pair:
  // met at the smallest budget, which is 0, so the need is exactly 0 with interval [0, 0] (within
  // any precision). pilot-only has no data at 0 (unit.hpp: +infinity, a failure) and succeeds
  // everywhere from 10: the crossing of beta = 0.8 is interpolated linearly in n from budget 0
  // (answer.hpp): 0.8 x 10 = 8, anywhere in (0, 10].
  const std::vector<int> grid{0, 10, 30, 100};
  std::vector<RunRecord> rows;
  for (int j = 0; j < 10; ++j)
    for (int n : grid) {
      rows.push_back(record(j, 0, Strategy::pooled, 1000, n, 0.0));
      rows.push_back(record(j, 0, Strategy::pilot_only, 0, n, n == 0 ? kInfinity : 0.0));
    }
  const auto out = compute_answers(rows, 0, settings_for({Strategy::pilot_only, Strategy::pooled}, {0, 1000}, grid),
                                   {query(0.5, 0.8)}, 1);
  REQUIRE(out.size() == 2);
  CHECK(out[0].strategy == Strategy::pilot_only);
  CHECK(out[0].status == AnswerStatus::reached);
  CHECK(out[0].needed_pilot == Approx(8.0).epsilon(1e-12));
  CHECK(out[0].low == 0.0);
  CHECK(out[0].high == 10.0);
  CHECK(out[1].strategy == Strategy::pooled);
  CHECK(out[1].status == AnswerStatus::met_at_smallest);
  CHECK(out[1].needed_pilot == 0.0);
  CHECK(out[1].low == 0.0);
  CHECK(out[1].high == 0.0);
  CHECK(meets_precision(out[1], 0.0));
  REQUIRE(out[1].saved_vs_pilot_only);
  CHECK(*out[1].saved_vs_pilot_only == Approx(8.0).epsilon(1e-12));
}

TEST_CASE("answer: relative half-width", "[answer]") {
  // answer.hpp: (high - low) / 2 / needed; +infinity when it cannot be computed.
  AnswerRow r;
  r.needed_pilot = 200.0;
  r.low = 180.0;
  r.high = 230.0;
  CHECK(relative_half_width(r) == Approx(0.125).epsilon(1e-15));
  CHECK_FALSE(meets_precision(r, 0.1));
  CHECK(meets_precision(r, 0.125));
  r.high = kInfinity;
  CHECK(std::isinf(relative_half_width(r)));
  r.high = std::nan("");
  CHECK(std::isinf(relative_half_width(r)));
  r.high = 230.0;
  r.needed_pilot = kInfinity;
  CHECK(std::isinf(relative_half_width(r)));
  r.needed_pilot = 0.0;
  CHECK(std::isinf(relative_half_width(r)));
  r.low = r.high = 0.0;
  CHECK(relative_half_width(r) == 0.0);
}

TEST_CASE("answer: speed of a full re-analysis", "[.][answer_perf]") {
  // size of a large re-analysis: 3 strategies x 3 logged x 2 queries x 10 scenarios, 400 pairs, B = 1000, in seconds.
  // Hidden (run with "[answer_perf]"); the data are noisy curves that mostly need extrapolation (worst case).
  const std::vector<Strategy> strategies{Strategy::pilot_only, Strategy::pooled, Strategy::regime_aware};
  const std::vector<int> logged{0, 100, 1000};
  std::vector<RunRecord> rows;
  boost::random::mt19937_64 rng(5);
  boost::random::normal_distribution<double> z;
  for (Strategy s : strategies)
    for (int l : logged)
      for (int j = 0; j < 400; ++j) {
        const double f = std::exp(0.3 * z(rng));
        for (int n : kGrid) {
          auto r = record(j / 10, j % 10, s, l, n, 0.004 + f * std::pow(n, -0.5) * std::exp(0.1 * z(rng)));
          r.return_gap = *r.model_kl * 2;
          rows.push_back(r);
        }
      }
  auto settings = settings_for(strategies, logged);
  AnswerQuery q1 = query(0.01, 0.8, Criterion::assurance, 1000);
  AnswerQuery q2 = q1;
  q2.measure = Measure::return_gap;
  q2.target = 0.05;
  const auto start = std::chrono::steady_clock::now();
  std::size_t total = 0;
  for (int sc = 0; sc < 10; ++sc) total += compute_answers(rows, 0, settings, {q1, q2}, sc).size();
  const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  WARN("10 scenarios, " << total << " answers in " << seconds << " s");
  CHECK(total == 180);
}
