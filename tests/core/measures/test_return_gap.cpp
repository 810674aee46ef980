// Tests of the return_gap measure (src/core/measures/return_gap.hpp).
#include <catch2/catch.hpp>

#include <boost/random/gamma_distribution.hpp>
#include <boost/random/uniform_01.hpp>
#include <cmath>
#include <limits>
#include <vector>

#include "core/measures/plan_value.hpp"
#include "core/measures/planner.hpp"
#include "../random_pomdp.hpp"
#include "core/measures/return_gap.hpp"

using namespace dobudget;

namespace {

using test::random_pomdp;

// A fitted-like model with Z latent values: random dynamics, the truth's rewards/horizon/discount.
Pomdp unrelated_model(const Pomdp& truth, int Z, std::uint64_t seed) {
  Pomdp f = random_pomdp(Z, truth.actions, truth.observations, truth.horizon, truth.discount, seed);
  f.rewards = truth.rewards;
  return f;
}

}  // namespace

TEST_CASE("normalised gap: 0 for V*, 1 for the uniform policy, none without room", "[return_gap]") {
  // Definition of docs/design.md, "return_gap": (V* - V) / (V* - V_uniform).
  CHECK(*normalised_gap(3.0, 1.0, 3.0) == 0.0);
  CHECK(*normalised_gap(3.0, 1.0, 1.0) == 1.0);
  CHECK(*normalised_gap(3.0, 1.0, 2.5) == Approx(0.25));
  CHECK(*normalised_gap(3.0, 1.0, 3.2) == Approx(-0.1));  // not clamped (return_gap.hpp)
  CHECK_FALSE(normalised_gap(1.0, 1.0, 1.0));
  CHECK_FALSE(normalised_gap(1.0, 1.0 - 1e-7, 1.0));         // below 1e-6 (1 + |V*|)
  CHECK_FALSE(normalised_gap(1.0, 0.9, 1.0, 0.06));          // below 2 standard errors
  CHECK(normalised_gap(1.0, 0.9, 1.0, 0.04).has_value());
}

TEST_CASE("return_gap with exact values: the truth's own plan has gap 0, the uniform policy 1", "[return_gap]") {
  const Pomdp truth = random_pomdp(3, 2, 3, 4, 0.95, 71, 0.5);
  PlannerSettings ps;
  const StreamKey key{5, 0, 2, 0};
  const ReturnGapReference ref = prepare_return_gap(truth, ps, key);
  REQUIRE(ref.v_star_exact);
  REQUIRE(ref.room);
  CHECK(ref.v_uniform == exact_uniform_value(truth));
  for (std::uint64_t rep : {0u, 3u}) {
    StreamKey rk = key;
    rk.replicate = rep;
    const ReturnGapResult g = return_gap(truth, truth, ref, ps, rk);
    REQUIRE(g.gap);
    CHECK(g.exact);
    CHECK(*g.gap == 0.0);  // same plan, same exact evaluation
    CHECK(g.value == ref.v_star);
  }
  // The uniform policy's value normalises to exactly 1 (same normalisation as return_gap).
  CHECK(*normalised_gap(ref.v_star, ref.v_uniform, exact_uniform_value(truth), ref.v_star_se) == 1.0);
  // ... and its rollout estimate to 1 within its error (4 standard errors, common practice).
  const PolicyValue u = rollout_uniform_value(truth, 20000, StreamKey{5, 0, 2, 1});
  const double den = ref.v_star - ref.v_uniform;
  CHECK(std::abs(*normalised_gap(ref.v_star, ref.v_uniform, u.mean) - 1.0) < 4 * u.standard_error / den);
  // With complete point sets V* is the optimum, so any other model's plan has gap >= 0 (up to
  // rounding; Bellman optimality), here also for a model with another number of states.
  for (int Z : {2, 3, 5}) {
    INFO("Z = " << Z);
    const ReturnGapResult g = return_gap(truth, unrelated_model(truth, Z, 100 + Z), ref, ps, key);
    REQUIRE(g.gap);
    CHECK(g.exact);
    CHECK(*g.gap >= -1e-12);
    CHECK(g.note.empty());
  }
}

TEST_CASE("return_gap with rollouts: gap 0 for the truth's plan within rollout error", "[return_gap]") {
  const Pomdp truth = random_pomdp(6, 3, 4, 12, 0.95, 81, 0.3);
  PlannerSettings ps;
  ps.belief_points = 150;
  ps.rollouts = 2000;
  const StreamKey key{5, 0, 3, 0};
  const ReturnGapReference ref = prepare_return_gap(truth, ps, key);
  REQUIRE_FALSE(ref.v_star_exact);  // 4^13 histories > exact_histories
  REQUIRE(ref.room);
  CHECK(ref.v_star_se > 0.0);
  // Same replicate stream: same plan, same episodes, paired differences exactly 0.
  const ReturnGapResult g0 = return_gap(truth, truth, ref, ps, key);
  REQUIRE(g0.gap);
  CHECK_FALSE(g0.exact);
  CHECK(*g0.gap == 0.0);
  CHECK(g0.gap_se == 0.0);
  // Another replicate: the plan in the truth is redrawn from other belief points (PBVI is
  // approximate), so the gap is near 0 but need not be 0: within 4 paired standard errors plus
  // 0.05 for the difference between two approximate plans (tolerance: judgment, common practice).
  StreamKey rk = key;
  rk.replicate = 1;
  const ReturnGapResult g1 = return_gap(truth, truth, ref, ps, rk);
  REQUIRE(g1.gap);
  CHECK(std::abs(*g1.gap) < 4 * g1.gap_se + 0.05);
  // An unrelated model's plan loses return.
  const ReturnGapResult gu = return_gap(truth, unrelated_model(truth, 4, 7), ref, ps, rk);
  REQUIRE(gu.gap);
  CHECK(*gu.gap > 4 * gu.gap_se);
  CHECK(gu.gap_se > 0.0);
}

TEST_CASE("return_gap reports no room for planning when every policy is worth the same", "[return_gap]") {
  Pomdp truth = random_pomdp(3, 2, 3, 3, 1.0, 91);
  truth.rewards.setConstant(0.5);  // every policy earns 0.5 per step
  PlannerSettings ps;
  const ReturnGapReference ref = prepare_return_gap(truth, ps, StreamKey{});
  CHECK_FALSE(ref.room);
  CHECK(ref.note == "no room for planning");
  const ReturnGapResult g = return_gap(truth, truth, ref, ps, StreamKey{});
  CHECK_FALSE(g.gap);
  CHECK(g.note == "no room for planning");
  CHECK(std::isnan(g.value));
}

TEST_CASE("return_gap rejects incompatible models", "[return_gap]") {
  const Pomdp truth = random_pomdp(3, 2, 3, 3, 1.0, 95);
  PlannerSettings ps;
  const ReturnGapReference ref = prepare_return_gap(truth, ps, StreamKey{});
  Pomdp bad = unrelated_model(truth, 3, 1);
  bad.horizon = 2;
  CHECK_THROWS_AS(return_gap(truth, bad, ref, ps, StreamKey{}), std::invalid_argument);
  const Pomdp fewer_obs = random_pomdp(3, 2, 2, 3, 1.0, 2);
  CHECK_THROWS_AS(return_gap(truth, fewer_obs, ref, ps, StreamKey{}), std::invalid_argument);
}
