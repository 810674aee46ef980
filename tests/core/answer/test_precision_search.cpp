// The range mode's next-round rule (src/core/answer/precision_search.hpp) on answer rows built
// by hand: what each kind of shortfall adds. Expected budgets are worked out by hand from the
// rule's arithmetic (geometric splitting in log(budget)), written beside each check.
#include <catch2/catch.hpp>

#include <algorithm>
#include <limits>

#include "core/answer/precision_search.hpp"

using namespace dobudget;

namespace {

Study range_study(bool family, std::vector<int> logged = {0, 1000}) {
  Study st;
  st.precision = PrecisionSettings{0.1, 2.0};
  Scenario sc;
  sc.settings.pilot_range = PilotRange{10, 1000};
  sc.settings.logged_budgets = std::move(logged);
  if (!family) sc.settings.environment.given = Environment{};
  st.scenarios.push_back(sc);
  return st;
}

AnswerRow row(AnswerStatus status, double needed, double low, double high, double blow, double bhigh, double slow,
              double shigh) {
  AnswerRow r;
  r.status = status;
  r.needed_pilot = needed;
  r.low = low;
  r.high = high;
  r.bracket_low = blow;
  r.bracket_high = bhigh;
  r.sampling_low = slow;
  r.sampling_high = shigh;
  return r;
}

}  // namespace

TEST_CASE("precision search: the coarse grid is 5 budgets evenly spaced in log(budget)", "[precision]") {
  // 10 x 100^(k/4): 10, 31.6, 100, 316.2, 1000.
  CHECK(coarse_grid({10, 1000}) == std::vector<int>{10, 32, 100, 316, 1000});
  // 1 x 3^(k/4): 1, 1.32, 1.73, 2.28, 3, rounded and without repeats.
  CHECK(coarse_grid({1, 3}) == std::vector<int>{1, 2, 3});
}

TEST_CASE("precision search: each shortfall asks for what is missing", "[precision]") {
  const Study st = range_study(true);
  SearchDesign d = first_design(st);
  REQUIRE(d.budgets == std::vector<int>{10, 32, 100, 316, 1000});

  SECTION("met: nothing more") {
    const SearchStep s = plan_next_round(st, d, {row(AnswerStatus::reached, 200, 190, 210, 190, 210, 195, 205)});
    CHECK(s.verdicts.at(0).met);
    CHECK(s.verdicts.at(0).why == "met");
    CHECK(!s.more);
  }
  SECTION("a bracket too wide: the gap 100..316 split in 4 in log(budget)") {
    // 100 x 3.16^(j/4), j = 1..3: 133.4, 177.8, 237.1.
    const SearchStep s = plan_next_round(st, d, {row(AnswerStatus::reached, 200, 100, 316, 100, 316, 190, 210)});
    CHECK(!s.verdicts.at(0).met);
    CHECK_THAT(s.verdicts.at(0).why, Catch::StartsWith("budgets"));
    REQUIRE(s.more);
    CHECK(s.next.budgets == std::vector<int>{10, 32, 100, 133, 178, 237, 316, 1000});
    CHECK(s.next.rounds == std::vector<int>{1, 1, 1, 2, 2, 2, 1, 1});
    CHECK(s.next.draws_scale == 1);
  }
  SECTION("met at the smallest budget: downward to 0 when logged episodes exist") {
    const SearchStep s = plan_next_round(st, d, {row(AnswerStatus::met_at_smallest, 10, 0, 10, 0, 10, 10, 10)});
    REQUIRE(s.more);
    CHECK(s.next.budgets.front() == 0);
    CHECK(std::count(s.next.budgets.begin(), s.next.budgets.end(), 5) == 1);  // 10 / 2
    CHECK(std::count(s.next.budgets.begin(), s.next.budgets.end(), 2) == 1);  // 10 / 4
    CHECK_THAT(s.verdicts.at(0).why, Catch::Contains("downward"));
    // Without logged episodes budget 0 has no data: the search stops at 1 (and 5, 2 above it).
    const SearchStep t =
        plan_next_round(range_study(true, {0}), d, {row(AnswerStatus::met_at_smallest, 10, 0, 10, 0, 10, 10, 10)});
    CHECK(t.next.budgets.front() == 1);
  }
  SECTION("the sampling part too wide: draws for the family, replicates for a given model") {
    // Sampling half-width 0.25 relative: factor (2 x 0.25 / 0.1)^2 = 25, at most 4 per round.
    const AnswerRow wide = row(AnswerStatus::reached, 200, 150, 250, 190, 210, 150, 250);
    const SearchStep s = plan_next_round(st, d, {wide});
    CHECK(s.next.draws_scale == 4);
    CHECK(s.next.replicates_scale == 1);
    CHECK_THAT(s.verdicts.at(0).why, Catch::Contains("draws"));
    const SearchStep g = plan_next_round(range_study(false), d, {wide});
    CHECK(g.next.replicates_scale == 4);
    CHECK(g.next.draws_scale == 1);
    CHECK_THAT(g.verdicts.at(0).why, Catch::Contains("replicates"));
  }
  SECTION("a crossing above budgets.pilot.to cannot be helped") {
    const double inf = std::numeric_limits<double>::infinity();
    const SearchStep s = plan_next_round(st, d, {row(AnswerStatus::unreachable, inf, 1000, inf, 1000, inf, inf, inf)});
    CHECK(!s.more);
    CHECK_THAT(s.verdicts.at(0).why, Catch::Contains("raise budgets.pilot.to"));
  }
  SECTION("round studies scale draws and replicates and tag budgets with their round") {
    d.draws_scale = 2;
    d.replicates_scale = 3;
    Study base = st;
    base.scenarios[0].settings.environment.draws = 4;
    base.scenarios[0].settings.replicates = 5;
    const Study r = round_study(base, d);
    CHECK(!r.precision);
    CHECK(!r.scenarios[0].settings.pilot_range);
    CHECK(r.scenarios[0].settings.environment.draws == 8);
    CHECK(r.scenarios[0].settings.replicates == 15);
    CHECK(r.scenarios[0].settings.pilot_rounds == d.rounds);
    SearchDesign earlier = d;
    earlier.draws_scale = 1;
    earlier.replicates_scale = 1;
    CHECK(unit_in_design(base, earlier, UnitId{0, 3, 4}));
    CHECK(!unit_in_design(base, earlier, UnitId{0, 4, 0}));
    CHECK(!unit_in_design(base, earlier, UnitId{0, 0, 5}));
  }
}
