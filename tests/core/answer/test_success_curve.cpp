// The raw success fraction per cell, src/core/answer/success_curve.hpp, against hand-counted data.
#include <catch2/catch.hpp>

#include "../run_records.hpp"

#include <cmath>
#include <limits>
#include <optional>
#include <stdexcept>
#include <vector>

#include "core/answer/success_curve.hpp"

using namespace dobudget;

namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

constexpr auto rec = test::make_record;

// Scenario 0: 2 draws x 2 replicates = 4 pairs; strategies pilot-only (logged 0) and
// regime-aware (logged 100); pilot budgets 10 and 30. Target 0.05. In runs.csv order
// (unit-major, then strategy, logged, pilot).
std::vector<RunRecord> hand_rows() {
  const auto P = Strategy::pilot_only;
  const auto R = Strategy::regime_aware;
  std::vector<RunRecord> v;
  //                 unit (0,0)
  v.push_back(rec(0, 0, 0, P, 0, 10, 0.20, 0.5));
  v.push_back(rec(0, 0, 0, P, 0, 30, 0.05, 0.1));   // equal to the target: a success
  v.push_back(rec(0, 0, 0, R, 100, 10, 0.04, std::nullopt));
  v.push_back(rec(0, 0, 0, R, 100, 30, 0.01, 0.0));
  //                 unit (0,1)
  v.push_back(rec(0, 0, 1, P, 0, 10, kInf, 0.9));   // infinite: a failure, counted
  v.push_back(rec(0, 0, 1, P, 0, 30, 0.03, 0.2));
  v.push_back(rec(0, 0, 1, R, 100, 10, 0.06, std::nullopt));
  v.push_back(rec(0, 0, 1, R, 100, 30, 0.02, 0.05));
  //                 unit (1,0)
  v.push_back(rec(0, 1, 0, P, 0, 10, 0.01, 0.3));
  v.push_back(rec(0, 1, 0, P, 0, 30, std::nullopt, 0.1));  // missing: left out
  v.push_back(rec(0, 1, 0, R, 100, 10, 0.05, std::nullopt));
  v.push_back(rec(0, 1, 0, R, 100, 30, 0.049, 0.3));
  //                 unit (1,1)
  v.push_back(rec(0, 1, 1, P, 0, 10, 0.5, 0.4));
  v.push_back(rec(0, 1, 1, P, 0, 30, kNaN, 0.05));    // NaN: left out
  v.push_back(rec(0, 1, 1, R, 100, 10, 0.051, std::nullopt));
  v.push_back(rec(0, 1, 1, R, 100, 30, 0.0, 0.01));
  // Scenario 1: one pair, one cell, with its own values.
  v.push_back(rec(1, 0, 0, P, 0, 10, 0.001, 0.01));
  return v;
}

void check(const SuccessCell& c, int scenario, Strategy s, int logged, int pilot, int pairs, int successes) {
  INFO("cell " << scenario << " " << name(s) << " " << logged << " " << pilot);
  CHECK(c.scenario == scenario);
  CHECK(c.strategy == s);
  CHECK(c.logged == logged);
  CHECK(c.pilot == pilot);
  CHECK(c.pairs == pairs);
  CHECK(c.successes == successes);
  if (pairs > 0) CHECK(c.fraction == static_cast<double>(successes) / pairs);
  else CHECK(std::isnan(c.fraction));
}

}  // namespace

TEST_CASE("success_curve counts pairs at or below the target, per cell, in first-appearance order",
          "[success_curve]") {
  const auto cells = success_curve(hand_rows(), Measure::model_kl, 0.05);
  REQUIRE(cells.size() == 5);
  // pilot-only, 10: 0.20 no, inf no, 0.01 yes, 0.5 no -> 1 of 4
  check(cells[0], 0, Strategy::pilot_only, 0, 10, 4, 1);
  // pilot-only, 30: 0.05 yes (equal), 0.03 yes, missing, NaN -> 2 of 2
  check(cells[1], 0, Strategy::pilot_only, 0, 30, 2, 2);
  // regime-aware, 10: 0.04 yes, 0.06 no, 0.05 yes, 0.051 no -> 2 of 4
  check(cells[2], 0, Strategy::regime_aware, 100, 10, 4, 2);
  // regime-aware, 30: 0.01, 0.02, 0.049, 0.0 -> 4 of 4
  check(cells[3], 0, Strategy::regime_aware, 100, 30, 4, 4);
  check(cells[4], 1, Strategy::pilot_only, 0, 10, 1, 1);
}

TEST_CASE("success_curve on the other measure, with a cell that has no value at all", "[success_curve]") {
  const auto cells = success_curve(hand_rows(), Measure::return_gap, 0.1);
  REQUIRE(cells.size() == 5);
  // pilot-only, 10: 0.5, 0.9, 0.3, 0.4 -> 0 of 4
  check(cells[0], 0, Strategy::pilot_only, 0, 10, 4, 0);
  // pilot-only, 30: 0.1 yes, 0.2 no, 0.1 yes, 0.05 yes -> 3 of 4
  check(cells[1], 0, Strategy::pilot_only, 0, 30, 4, 3);
  // regime-aware, 10: no values -> 0 pairs, fraction NaN
  check(cells[2], 0, Strategy::regime_aware, 100, 10, 0, 0);
  // regime-aware, 30: 0.0, 0.05, 0.3, 0.01 -> 3 of 4
  check(cells[3], 0, Strategy::regime_aware, 100, 30, 4, 3);
  check(cells[4], 1, Strategy::pilot_only, 0, 10, 1, 1);
}

TEST_CASE("success_curve restricted to one scenario, order independence and bad targets", "[success_curve]") {
  const auto rows = hand_rows();
  const auto s1 = success_curve(rows, 1, Measure::model_kl, 0.0001);
  REQUIRE(s1.size() == 1);
  check(s1[0], 1, Strategy::pilot_only, 0, 10, 1, 0);
  const auto s0 = success_curve(rows, 0, Measure::model_kl, 0.05);
  REQUIRE(s0.size() == 4);
  check(s0[3], 0, Strategy::regime_aware, 100, 30, 4, 4);
  CHECK(success_curve(rows, 7, Measure::model_kl, 0.05).empty());

  // Reversing the rows reverses the cell order but not the counts.
  std::vector<RunRecord> reversed(rows.rbegin(), rows.rend());
  const auto r = success_curve(reversed, Measure::model_kl, 0.05);
  REQUIRE(r.size() == 5);
  check(r[0], 1, Strategy::pilot_only, 0, 10, 1, 1);
  check(r[1], 0, Strategy::regime_aware, 100, 30, 4, 4);
  check(r[4], 0, Strategy::pilot_only, 0, 10, 4, 1);

  // An infinite target makes every present finite or infinite value a success.
  const auto all = success_curve(rows, 0, Measure::model_kl, kInf);
  check(all[0], 0, Strategy::pilot_only, 0, 10, 4, 4);

  CHECK_THROWS_AS(success_curve(rows, Measure::model_kl, kNaN), std::invalid_argument);
  CHECK(success_curve({}, Measure::model_kl, 0.05).empty());
}
