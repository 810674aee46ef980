// Which pilot to run (pilot_choice.hpp): the best policy per cell, its saving against uniform and
// the paired interval.
#include <catch2/catch.hpp>

#include <boost/random/normal_distribution.hpp>
#include <cmath>
#include <limits>

#include "core/answer/pilot_choice.hpp"
#include "core/world/seeding.hpp"

using namespace dobudget;

namespace {

Study pc_study(std::vector<PilotPolicyKind> policies, std::vector<std::string> privileges = {""}) {
  Study st;
  int index = 0;
  for (const std::string& priv : privileges)
    for (PilotPolicyKind p : policies) {
      Scenario sc;
      sc.index = index++;
      sc.settings.pilot.policy = p;
      if (!priv.empty()) sc.assignments.emplace_back("logging.privilege", priv);
      sc.assignments.emplace_back("pilot.policy", std::string(name(p)));
      st.scenarios.push_back(sc);
    }
  return st;
}

AnswerRow pc_row(int scenario, PilotPolicyKind p, double needed, std::vector<double> resamples) {
  AnswerRow r;
  r.scenario = scenario;
  r.pilot_policy = p;
  r.strategy = Strategy::regime_aware;
  r.logged = 1000;
  r.target = 0.02;
  r.assurance = 0.8;
  r.needed_pilot = needed;
  r.pairs = 40;
  r.draws = 4;
  r.resampled_needs = std::move(resamples);
  return r;
}

}  // namespace

TEST_CASE("pilot choice: a constant paired shift gives a point interval; unpaired spread does not enter",
          "[pilot-choice]") {
  // Resampled needs with a wide spread (sd 40 around 200); complement needs exactly 30 fewer in
  // every resample. Paired differences are all 30, so the interval is [30, 30], while the two
  // policies' own percentile intervals are about 130 wide: pairing removes the shared spread
  // (Efron and Tibshirani 1993, ch. 13, paired comparisons through common resamples).
  Engine rng(3);
  boost::random::normal_distribution<double> normal(200.0, 40.0);
  std::vector<double> u(1000), c(1000), t(1000);
  for (std::size_t k = 0; k < u.size(); ++k) {
    u[k] = normal(rng);
    c[k] = u[k] - 30.0;
    t[k] = u[k] + 5.0;
  }
  const Study st = pc_study({PilotPolicyKind::uniform, PilotPolicyKind::complement, PilotPolicyKind::targeted});
  const std::vector<AnswerRow> rows{pc_row(0, PilotPolicyKind::uniform, 200.0, u),
                                    pc_row(1, PilotPolicyKind::complement, 170.0, c),
                                    pc_row(2, PilotPolicyKind::targeted, 205.0, t)};
  const auto choice = choose_pilot_policies(st, rows);
  REQUIRE(choice.size() == 1);
  CHECK(choice[0].best == PilotPolicyKind::complement);
  CHECK(choice[0].best_scenario == 1);
  REQUIRE(choice[0].saved_vs_uniform);
  CHECK(*choice[0].saved_vs_uniform == Approx(30.0));
  CHECK(choice[0].low == Approx(30.0));
  CHECK(choice[0].high == Approx(30.0));
  CHECK(choice[0].needed.size() == 3);
}

TEST_CASE("pilot choice: ties go to uniform; unknown needs lose; groups follow the other swept keys", "[pilot-choice]") {
  const Study st = pc_study({PilotPolicyKind::uniform, PilotPolicyKind::usual_practice}, {"0.5", "0.9"});
  const double nan = std::numeric_limits<double>::quiet_NaN(), inf = std::numeric_limits<double>::infinity();
  const std::vector<AnswerRow> rows{pc_row(0, PilotPolicyKind::uniform, 100.0, {100.0, inf}),
                                    pc_row(1, PilotPolicyKind::usual_practice, 100.0, {90.0, inf}),
                                    pc_row(2, PilotPolicyKind::uniform, inf, {inf, 300.0}),
                                    pc_row(3, PilotPolicyKind::usual_practice, nan, {inf, inf})};
  const auto choice = choose_pilot_policies(st, rows);
  REQUIRE(choice.size() == 2);
  CHECK(choice[0].others == "logging.privilege=0.5");
  CHECK(choice[0].best == PilotPolicyKind::uniform);  // a tie
  CHECK(*choice[0].saved_vs_uniform == 0.0);
  // The best is uniform itself: every paired difference is 0.
  CHECK(choice[0].low == 0.0);
  CHECK(choice[0].high == 0.0);
  CHECK(choice[1].others == "logging.privilege=0.9");
  CHECK(choice[1].best == PilotPolicyKind::uniform);  // unknown is worse than unreachable
  CHECK_FALSE(choice[1].saved_vs_uniform);           // inf - inf: no saving to state
  // Without a uniform scenario, nothing to compare against.
  const Study no_uniform = pc_study({PilotPolicyKind::complement, PilotPolicyKind::targeted});
  CHECK(choose_pilot_policies(no_uniform, {pc_row(0, PilotPolicyKind::complement, 1.0, {}),
                                           pc_row(1, PilotPolicyKind::targeted, 2.0, {})})
            .empty());
}
