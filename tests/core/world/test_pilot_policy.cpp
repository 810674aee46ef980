// Pilot policies (issue 13): they read the record only (compile-time and run-time checks),
// complement's floor, and usual-practice reproducing the loggers' action frequencies.
#include <catch2/catch.hpp>

#include <boost/math/distributions/chi_squared.hpp>
#include <cmath>
#include <concepts>
#include <span>
#include <type_traits>
#include <vector>

#include "core/fitting/targeted_pilot.hpp"
#include "core/running/settings.hpp"
#include "core/world/dataset.hpp"
#include "core/world/logging_policy.hpp"
#include "core/world/pilot_policy.hpp"
#include "core/world/synthetic.hpp"
#include "../random_pomdp.hpp"

using namespace dobudget;

namespace {

// What a policy that could read the hidden state would accept: a state index (with or without
// the record), or the environment itself.
template <class P>
concept reads_state_alone = requires(P& p, int state, std::span<double> out) { p.probabilities(state, out); };
template <class P>
concept reads_state_with_record = requires(P& p, const RecordedHistory& h, int state, std::span<double> out) {
  p.probabilities(h, state, out);
};
template <class P>
concept reads_environment = requires(P& p, const Environment& env, std::span<double> out) { p.probabilities(env, out); };
template <class P>
concept reads_record = requires(P& p, const RecordedHistory& h, std::span<double> out) { p.probabilities(h, out); };

template <class P>
constexpr bool record_only = reads_record<P> && !reads_state_alone<P> && !reads_state_with_record<P> &&
                             !reads_environment<P>;

// The interface and every policy: the record, and nothing that carries the state.
static_assert(record_only<PilotPolicy>);
static_assert(record_only<UniformPilot>);
static_assert(record_only<UsualPracticePilot>);
static_assert(record_only<ComplementPilot>);
static_assert(record_only<TargetedPilot>);
// A record is built from observations and actions only: not from a state, an environment or a model.
static_assert(!std::is_constructible_v<RecordedHistory, int>);
static_assert(!std::is_constructible_v<RecordedHistory, int, std::span<double>>);
static_assert(!std::is_constructible_v<RecordedHistory, const Environment&>);
static_assert(!std::is_constructible_v<RecordedHistory, const Pomdp&>);
static_assert(!std::is_convertible_v<int, RecordedHistory>);
static_assert(std::is_constructible_v<RecordedHistory, std::span<const std::int32_t>, std::span<const std::int32_t>>);

Environment small_environment(int S, int A, int O, int H, std::uint64_t seed) {
  Environment env;
  env.model = test::random_pomdp(S, A, O, H, 1.0, seed, 0.5);
  LoggingSettings logging;  // privileged loggers (privilege 0.9, temperature 0.2)
  env.logging_policy = privileged_logging_policy(env.model, logging);
  return env;
}

// Records every history it is shown and answers uniformly.
class Spy final : public PilotPolicy {
 public:
  explicit Spy(int actions) : actions_(actions) {}
  void probabilities(const RecordedHistory& h, std::span<double> out) override {
    seen.emplace_back(h.observations().begin(), h.observations().end());
    seen_actions.emplace_back(h.actions().begin(), h.actions().end());
    for (auto& p : out) p = 1.0 / actions_;
  }
  std::vector<std::vector<std::int32_t>> seen, seen_actions;

 private:
  int actions_;
};

}  // namespace

TEST_CASE("pilot policy: the simulator shows a policy exactly the record so far, nothing more", "[pilot-policy]") {
  const Environment env = small_environment(3, 2, 3, 4, 11);
  Spy spy(2);
  Engine rng(5);
  const Dataset d = simulate_pilot(env, spy, 20, rng);
  REQUIRE(spy.seen.size() == static_cast<std::size_t>(20 * 4));
  for (int i = 0; i < 20; ++i)
    for (int t = 0; t < 4; ++t) {
      const auto& o = spy.seen[static_cast<std::size_t>(i * 4 + t)];
      const auto& a = spy.seen_actions[static_cast<std::size_t>(i * 4 + t)];
      REQUIRE(o.size() == static_cast<std::size_t>(t + 1));
      REQUIRE(a.size() == static_cast<std::size_t>(t));
      for (int k = 0; k <= t; ++k) CHECK(o[static_cast<std::size_t>(k)] == d.obs(i)[k]);
      for (int k = 0; k < t; ++k) CHECK(a[static_cast<std::size_t>(k)] == d.act(i)[k]);
    }
}

TEST_CASE("pilot policy: a uniform policy simulates exactly the pilot regime of earlier versions", "[pilot-policy]") {
  const Environment env = small_environment(3, 3, 2, 5, 12);
  UniformPilot u(3);
  Engine a(9), b(9);
  const Dataset x = simulate(env, Regime::pilot, 50, a);
  const Dataset y = simulate_pilot(env, u, 50, b);
  CHECK(x.observations == y.observations);
  CHECK(x.actions == y.actions);
}

TEST_CASE("pilot policy: complement tries other actions after an observation where the loggers always took action 0",
          "[pilot-policy]") {
  // Hand-made records (A = 3, O = 2, H = 1): after observation X = 1 the loggers always took action
  // 0 (300 times); after observation 0 they took each action 100 times.
  constexpr int A = 3, O = 2, X = 1;
  Dataset logged;
  logged.horizon = 1;
  for (int i = 0; i < 600; ++i) {
    const int o = i < 300 ? X : 0;
    logged.observations.insert(logged.observations.end(), {o, 0});
    logged.actions.push_back(o == X ? 0 : i % 3);
  }
  logged.count = 600;
  const double floor = 0.2;
  ComplementPilot policy(action_counts(logged, logged.count, O, A), floor);
  // The stated rule's bound (pilot_policy.hpp): every action keeps at least floor / A; so another
  // action than 0 has at least (A - 1) floor / A after X.
  const double bound = (A - 1) * floor / A;
  REQUIRE(policy.least_probability() == Approx(floor / A));
  const std::int32_t obs[] = {X};
  std::vector<double> p(A);
  policy.probabilities(RecordedHistory(obs, {}), p);
  CHECK(p[1] >= floor / A);
  CHECK(p[2] >= floor / A);
  CHECK(p[1] + p[2] >= bound);
  CHECK(p[0] + p[1] + p[2] == Approx(1.0));
  CHECK(p[0] < p[1]);  // the action the records show most is the least favoured

  // And in simulation: an environment whose first observation is X with probability 1/2.
  Environment env;
  Pomdp& m = env.model;
  m.states = 2;
  m.actions = A;
  m.observations = O;
  m.horizon = 1;
  m.initial = Vector::Constant(2, 0.5);
  m.transitions.assign(A, Matrix::Constant(2, 2, 0.5));
  m.emissions = Matrix::Identity(2, 2);
  m.rewards = Vector::Zero(2);
  env.logging_policy = Matrix::Constant(2, A, 1.0 / A);
  Engine rng(77);
  const Dataset pilot = simulate_pilot(env, policy, 4000, rng);
  int after_x = 0, other = 0;
  for (int i = 0; i < pilot.count; ++i)
    if (pilot.obs(i)[0] == X) ++after_x, other += pilot.act(i)[0] != 0 ? 1 : 0;
  REQUIRE(after_x > 1000);
  // At least the stated probability, within sampling error: a one-sided binomial check at 4 standard
  // errors of the bound (normal approximation, *common practice*).
  const double se = std::sqrt(bound * (1.0 - bound) / after_x);
  CHECK(static_cast<double>(other) / after_x >= bound - 4.0 * se);
}

TEST_CASE("pilot policy: usual-practice with explore 0 reproduces the loggers' action frequencies per observation",
          "[pilot-policy]") {
  // Logged records from state-aware loggers; the pilot with explore 0 acts, after each recorded
  // observation x, with the loggers' frequencies f(a | x) = n(x, a) / n(x). Pearson's chi-square
  // goodness of fit of the pilot's action counts after each x to m(x) f(a | x), summed over the
  // observations (independent multinomials; Agresti, "Categorical Data Analysis", 2nd ed., 2002,
  // sec. 1.5), against the 0.999 quantile of chi-square with sum_x (cells(x) - 1) degrees of
  // freedom (Boost.Math). Actions the loggers never took after x must never be taken.
  constexpr int S = 3, A = 3, O = 4, H = 6;
  const Environment env = small_environment(S, A, O, H, 21);
  Engine logged_rng(31), pilot_rng(41);
  const Dataset logged = simulate(env, Regime::logged, 400, logged_rng);
  const ActionCounts n = action_counts(logged, logged.count, O, A);
  UsualPracticePilot policy(n, 0.0);
  const Dataset pilot = simulate_pilot(env, policy, 3000, pilot_rng);
  std::vector<double> m(static_cast<std::size_t>(O * A), 0.0);
  for (int i = 0; i < pilot.count; ++i)
    for (int t = 0; t < H; ++t) m[static_cast<std::size_t>(pilot.obs(i)[t] * A + pilot.act(i)[t])] += 1.0;
  double chi2 = 0.0;
  int df = 0;
  for (int x = 0; x < O; ++x) {
    double nx = 0.0, mx = 0.0;
    for (int a = 0; a < A; ++a) nx += n.at(x, a), mx += m[static_cast<std::size_t>(x * A + a)];
    if (nx == 0.0 || mx == 0.0) continue;
    int cells = 0;
    for (int a = 0; a < A; ++a) {
      const double observed = m[static_cast<std::size_t>(x * A + a)];
      const double expected = mx * n.at(x, a) / nx;
      if (expected == 0.0) {
        CHECK(observed == 0.0);
        continue;
      }
      chi2 += (observed - expected) * (observed - expected) / expected;
      ++cells;
    }
    df += cells - 1;
  }
  REQUIRE(df >= 3);
  const double critical = boost::math::quantile(boost::math::chi_squared(df), 0.999);
  CHECK(chi2 < critical);

  // The same test fails for the uniform pilot whenever the loggers are far from uniform: the test
  // can fail (the loggers here are state-aware and sharp).
  UniformPilot uniform(A);
  Engine u_rng(41);
  const Dataset upilot = simulate_pilot(env, uniform, 3000, u_rng);
  std::vector<double> mu(static_cast<std::size_t>(O * A), 0.0);
  for (int i = 0; i < upilot.count; ++i)
    for (int t = 0; t < H; ++t) mu[static_cast<std::size_t>(upilot.obs(i)[t] * A + upilot.act(i)[t])] += 1.0;
  double chi2u = 0.0;
  for (int x = 0; x < O; ++x) {
    double nx = 0.0, mx = 0.0;
    for (int a = 0; a < A; ++a) nx += n.at(x, a), mx += mu[static_cast<std::size_t>(x * A + a)];
    if (nx == 0.0 || mx == 0.0) continue;
    for (int a = 0; a < A; ++a) {
      const double expected = mx * n.at(x, a) / nx;
      const double observed = mu[static_cast<std::size_t>(x * A + a)];
      chi2u += expected > 0.0 ? (observed - expected) * (observed - expected) / expected : (observed > 0.0 ? 1e9 : 0.0);
    }
  }
  CHECK(chi2u > critical);
}

TEST_CASE("pilot policy: usual-practice mixes explore / A uniformly; unseen observations are uniform", "[pilot-policy]") {
  ActionCounts c;
  c.observations = 2;
  c.actions = 2;
  c.n = {30.0, 10.0, 0.0, 0.0};  // after observation 0: 30 x action 0, 10 x action 1; observation 1 unseen
  UsualPracticePilot policy(c, 0.4);
  std::vector<double> p(2);
  const std::int32_t o0[] = {0}, o1[] = {1};
  policy.probabilities(RecordedHistory(o0, {}), p);
  // (1 - e) n(x, a) / n(x) + e / A = 0.6 * 0.75 + 0.2 and 0.6 * 0.25 + 0.2
  CHECK(p[0] == Approx(0.65));
  CHECK(p[1] == Approx(0.35));
  policy.probabilities(RecordedHistory(o1, {}), p);
  CHECK(p[0] == Approx(0.5));
  CHECK(p[1] == Approx(0.5));
}
