// Tests of plan execution values (src/core/measures/plan_value.hpp).
#include <catch2/catch.hpp>

#include <boost/random/gamma_distribution.hpp>
#include <boost/random/uniform_01.hpp>
#include <cmath>
#include <vector>

#include "core/measures/plan_value.hpp"
#include "core/measures/planner.hpp"
#include "../random_pomdp.hpp"

using namespace dobudget;

namespace {

using test::random_pomdp;

// (1 - w) * truth + w * noise, row by row; carries the truth's rewards, horizon and discount.
Pomdp perturbed(const Pomdp& truth, double w, std::uint64_t seed) {
  const Pomdp noise = random_pomdp(truth.states, truth.actions, truth.observations, truth.horizon, truth.discount, seed);
  Pomdp m = truth;
  m.initial = (1 - w) * truth.initial + w * noise.initial;
  for (int a = 0; a < truth.actions; ++a) m.transitions[a] = (1 - w) * truth.transitions[a] + w * noise.transitions[a];
  m.emissions = (1 - w) * truth.emissions + w * noise.emissions;
  return m;
}

// A model of Z = S + 1 states with state 0 split into two identical halves: it generates the same
// observation process under every policy (observationally equivalent), so its beliefs, lumped,
// are the truth's beliefs.
Pomdp split_first_state(const Pomdp& m) {
  const int S = m.states, Z = S + 1;
  auto lift = [&](int s) { return s == 0 ? 0 : s + 1; };  // z = 0, 1 are halves of s = 0
  Pomdp f = m;
  f.states = Z;
  f.initial = Vector::Zero(Z);
  f.emissions = Matrix::Zero(Z, m.observations);
  for (int z = 0; z < Z; ++z) {
    const int s = z <= 1 ? 0 : z - 1;
    f.initial(z) = z <= 1 ? m.initial(0) / 2 : m.initial(s);
    f.emissions.row(z) = m.emissions.row(s);
  }
  for (int a = 0; a < m.actions; ++a) {
    Matrix T = Matrix::Zero(Z, Z);
    for (int z = 0; z < Z; ++z) {
      const int s = z <= 1 ? 0 : z - 1;
      for (int s2 = 0; s2 < S; ++s2) {
        if (s2 == 0) {
          T(z, 0) = m.transitions[a](s, 0) / 2;
          T(z, 1) = m.transitions[a](s, 0) / 2;
        } else {
          T(z, lift(s2)) = m.transitions[a](s, s2);
        }
      }
    }
    f.transitions[a] = T;
  }
  return f;
}

// Independent brute force for the uniform policy: enumerate every action and observation sequence.
double uniform_by_enumeration(const Pomdp& m, const std::vector<double>& q, int t) {
  if (t == m.horizon) return 0.0;
  double v = 0.0;
  for (int a = 0; a < m.actions; ++a) {
    for (int o = 0; o < m.observations; ++o) {
      std::vector<double> qn(m.states, 0.0);
      double mass = 0.0;
      for (int s2 = 0; s2 < m.states; ++s2) {
        for (int s = 0; s < m.states; ++s) qn[s2] += q[s] * m.transitions[a](s, s2);
        qn[s2] *= m.emissions(s2, o) / m.actions;
        mass += qn[s2];
      }
      if (mass <= 0.0) continue;
      v += std::pow(m.discount, t) * mass * m.rewards(o) + uniform_by_enumeration(m, qn, t + 1);
    }
  }
  return v;
}

}  // namespace

TEST_CASE("exact uniform-policy value equals enumeration over actions and observations", "[plan_value]") {
  // Reference: brute-force enumeration written above (common practice).
  for (std::uint64_t seed : {1u, 2u}) {
    const Pomdp m = random_pomdp(3, 2, 3, 3, 0.9, seed);
    std::vector<double> q(m.initial.data(), m.initial.data() + m.states);
    CHECK(exact_uniform_value(m) == Approx(uniform_by_enumeration(m, q, 0)).margin(1e-12));
  }
}

TEST_CASE("exact evaluation counts reachable histories and falls back to rollouts", "[plan_value]") {
  const Pomdp m = random_pomdp(3, 2, 3, 3, 1.0, 5);
  PlannerSettings ps;
  const Plan p = plan(m, ps, StreamKey{});
  // Dense rows: every sequence o_0..o_3 has positive probability, 3^4 = 81 histories
  // (threshold contract of plan_value.hpp).
  const auto exact = exact_plan_value(m, m, p, 81);
  REQUIRE(exact);
  CHECK(exact->exact);
  CHECK(exact->histories == 81);
  CHECK_FALSE(exact_plan_value(m, m, p, 80));
  ps.exact_histories = 80;
  ps.rollouts = 500;
  const PolicyValue r = plan_value(m, m, p, ps, StreamKey{});
  CHECK_FALSE(r.exact);
  CHECK(r.histories == 500);
  CHECK(r.standard_error > 0.0);
}

TEST_CASE("a plan from an observationally equivalent model with more states has the same value", "[plan_value]") {
  // Z = S + 1 belief tracking (state 0 split in two): the filter of the split model, lumped, is the
  // truth's filter, so with complete point sets both plans are optimal and their executed values
  // agree to rounding (follows from the belief-state MDP of Kaelbling, Littman and Cassandra 1998,
  // sec. 3.2: the value depends on the model only through the observation process).
  const Pomdp m = random_pomdp(3, 2, 3, 3, 0.95, 8);
  const Pomdp f = split_first_state(m);
  REQUIRE(validate(f).empty());
  PlannerSettings ps;
  const Plan pm = plan(m, ps, StreamKey{});
  const Plan pf = plan(f, ps, StreamKey{});
  REQUIRE(pf.states == 4);
  const auto vm = exact_plan_value(m, m, pm, 1'000'000);
  const auto vf = exact_plan_value(m, f, pf, 1'000'000);
  REQUIRE(vm);
  REQUIRE(vf);
  CHECK(vf->mean == Approx(vm->mean).margin(1e-9).epsilon(0));
  CHECK(initial_value(pf, f) == Approx(vm->mean).margin(1e-9).epsilon(0));
}

TEST_CASE("exact and rollout values agree within their standard error", "[plan_value]") {
  // |exact - rollout| < 4 standard errors (common practice: a 4-sigma check fails with probability
  // ~6e-5 per comparison under the central limit theorem; the streams are fixed, so it is repeatable).
  const Pomdp m = random_pomdp(3, 2, 3, 4, 0.9, 41, 0.5);
  PlannerSettings ps;
  const int n = 20000;
  const StreamKey key{3, 0, 1, 2};

  const Plan optimal = plan(m, ps, StreamKey{});
  const Pomdp wrong = perturbed(m, 0.5, 42);
  const Plan from_wrong = plan(wrong, ps, StreamKey{});
  Pomdp other = random_pomdp(4, 2, 3, 4, 0.9, 43);  // a model of another size, truth's rewards
  other.rewards = m.rewards;
  const Plan from_other = plan(other, ps, StreamKey{});

  struct Case {
    const char* name;
    const Pomdp* bm;
    const Plan* p;
  } cases[] = {{"optimal", &m, &optimal}, {"perturbed model", &wrong, &from_wrong}, {"Z = 4 model", &other, &from_other}};
  for (const Case& c : cases) {
    INFO(c.name);
    const auto e = exact_plan_value(m, *c.bm, *c.p, 1'000'000);
    REQUIRE(e);
    const PolicyValue r = rollout_plan_value(m, *c.bm, *c.p, n, key);
    CHECK(std::abs(e->mean - r.mean) < 4 * r.standard_error);
  }
  const PolicyValue u = rollout_uniform_value(m, n, key);
  CHECK(std::abs(exact_uniform_value(m) - u.mean) < 4 * u.standard_error);
  // The optimum is at least as good as the other policies (exact values; Bellman optimality).
  CHECK(exact_plan_value(m, m, optimal, 1'000'000)->mean >= exact_plan_value(m, wrong, from_wrong, 1'000'000)->mean - 1e-12);
  CHECK(exact_plan_value(m, m, optimal, 1'000'000)->mean >= exact_uniform_value(m) - 1e-12);
}

TEST_CASE("rollouts use common random numbers", "[plan_value]") {
  const Pomdp m = random_pomdp(4, 3, 3, 10, 0.95, 51, 0.5);
  PlannerSettings ps;
  ps.belief_points = 100;
  const Plan optimal = plan(m, ps, StreamKey{});
  const Pomdp wrong = perturbed(m, 0.6, 52);
  const Plan from_wrong = plan(wrong, ps, StreamKey{});
  const StreamKey key{9, 1, 2, 3};
  std::vector<double> a, a2, b, u;
  const PolicyValue va = rollout_plan_value(m, m, optimal, 4000, key, &a);
  rollout_plan_value(m, m, optimal, 4000, key, &a2);
  const PolicyValue vb = rollout_plan_value(m, wrong, from_wrong, 4000, key, &b);
  const PolicyValue vu = rollout_uniform_value(m, 4000, key, &u);
  CHECK(a == a2);  // same key: identical episodes (docs/design.md, "Seeding and reproducibility")
  // Paired differences under CRN have a smaller standard error than independent estimates would
  // (common practice: Var(X - Y) = Var X + Var Y - 2 Cov(X, Y), Cov > 0 under CRN).
  for (const auto* other : {&b, &u}) {
    const PolicyValue& vo = other == &b ? vb : vu;
    double mean = 0.0;
    for (std::size_t i = 0; i < a.size(); ++i) mean += a[i] - (*other)[i];
    mean /= static_cast<double>(a.size());
    double ss = 0.0;
    for (std::size_t i = 0; i < a.size(); ++i) ss += std::pow(a[i] - (*other)[i] - mean, 2);
    const double se_diff = std::sqrt(ss / (a.size() - 1) / a.size());
    CHECK(se_diff < std::hypot(va.standard_error, vo.standard_error));
  }
  std::vector<double> c;
  rollout_plan_value(m, m, optimal, 4000, StreamKey{9, 1, 2, 4}, &c);
  CHECK(c != a);  // another replicate: other episodes
}

TEST_CASE("belief tracking survives observations the belief model deems impossible", "[plan_value]") {
  // Contract of plan_value.hpp: the agent keeps its predicted belief.
  const Pomdp m = random_pomdp(3, 2, 3, 3, 1.0, 61);
  Pomdp blind = m;
  for (int s = 0; s < m.states; ++s) {
    blind.emissions(s, 0) = 0.0;
    blind.emissions.row(s) /= blind.emissions.row(s).sum();
  }
  PlannerSettings ps;
  const Plan p = plan(blind, ps, StreamKey{});
  const auto e = exact_plan_value(m, blind, p, 1'000'000);
  REQUIRE(e);
  CHECK(std::isfinite(e->mean));
  const PolicyValue r = rollout_plan_value(m, blind, p, 20000, StreamKey{1, 2, 3, 4});
  CHECK(std::abs(e->mean - r.mean) < 4 * r.standard_error);
}
