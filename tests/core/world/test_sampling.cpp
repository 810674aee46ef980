// Reference tests of the samplers (src/core/world/sampling.hpp), the synthetic family (src/core/world/synthetic.hpp)
// and the privileged logging policy (src/core/world/logging_policy.hpp) against closed forms.
#include <catch2/catch.hpp>

#include <boost/math/distributions/chi_squared.hpp>
#include <boost/random/uniform_01.hpp>
#include <cmath>
#include <limits>
#include <vector>

#include "core/world/logging_policy.hpp"
#include "core/world/sampling.hpp"
#include "core/world/seeding.hpp"
#include "core/world/synthetic.hpp"

using namespace dobudget;

namespace {

// Pearson chi-square statistic over the cells with positive expected count; returns (statistic, cells).
std::pair<double, int> smp_chi_square(const std::vector<long>& counts, const std::vector<double>& p, long n) {
  double x2 = 0.0;
  int cells = 0;
  for (std::size_t i = 0; i < p.size(); ++i) {
    if (p[i] <= 0.0) continue;
    const double e = static_cast<double>(n) * p[i];
    x2 += (static_cast<double>(counts[i]) - e) * (static_cast<double>(counts[i]) - e) / e;
    ++cells;
  }
  return {x2, cells};
}

// Optimal action values of the fully observed MDP by plain value iteration, written independently:
// Q(s,a) = sum_s' T[a](s,s') [ sum_o E(s',o) r(o) + g max_a' Q(s',a') ]
// (Bellman optimality equation; Sutton and Barto, Reinforcement Learning, 2nd ed., 2018, eq. 3.20).
std::vector<std::vector<double>> smp_value_iteration(const Pomdp& m, double g, int sweeps) {
  const int S = m.states, A = m.actions, O = m.observations;
  std::vector<double> R(static_cast<std::size_t>(S), 0.0), V(static_cast<std::size_t>(S), 0.0);
  for (int s = 0; s < S; ++s)
    for (int o = 0; o < O; ++o) R[static_cast<std::size_t>(s)] += m.emissions(s, o) * m.rewards(o);
  std::vector<std::vector<double>> Q(static_cast<std::size_t>(S), std::vector<double>(static_cast<std::size_t>(A), 0.0));
  for (int k = 0; k < sweeps; ++k) {
    for (int s = 0; s < S; ++s)
      for (int a = 0; a < A; ++a) {
        double q = 0.0;
        for (int s2 = 0; s2 < S; ++s2)
          q += m.transitions[static_cast<std::size_t>(a)](s, s2) * (R[static_cast<std::size_t>(s2)] + g * V[static_cast<std::size_t>(s2)]);
        Q[static_cast<std::size_t>(s)][static_cast<std::size_t>(a)] = q;
      }
    for (int s = 0; s < S; ++s) {
      double best = -std::numeric_limits<double>::infinity();
      for (int a = 0; a < A; ++a) best = std::max(best, Q[static_cast<std::size_t>(s)][static_cast<std::size_t>(a)]);
      V[static_cast<std::size_t>(s)] = best;
    }
  }
  return Q;
}

template <typename Row>
void smp_random_row(Engine& rng, Row&& row) {
  boost::random::uniform_01<double> U;
  double s = 0.0;
  for (Eigen::Index j = 0; j < row.size(); ++j) s += (row(j) = 0.05 + U(rng));
  row /= s;
}

}  // namespace

// =============================================================================================
// Dirichlet moments.

TEST_CASE("sampling: Dirichlet(alpha 1) has the closed-form mean and variance", "[sampling]") {
  // Kotz, Balakrishnan and Johnson, Continuous Multivariate Distributions vol. 1, 2000, ch. 49:
  // for Dirichlet(alpha, ..., alpha) of size k each component has mean 1/k and variance
  // (k-1) / (k^2 (k alpha + 1)). Tolerances: n = 20000 draws per alpha, |sample mean - 1/k| <= 5 standard
  // errors sqrt(var/n); |sample variance - var| <= 5 standard errors sqrt((m4 - s^4)/n), with the fourth
  // central moment m4 estimated from the sample (*common practice*: asymptotic SE of the sample variance).
  // With 4 alphas x 4 components x 2 statistics the chance of a false alarm at 5 SE is about 2e-5; the
  // seed is fixed anyway.
  const int k = 4;
  const long n = 20000;
  for (double alpha : {0.1, 0.5, 1.0, 5.0}) {
    INFO("alpha=" << alpha);
    Engine rng(1000 + static_cast<std::uint64_t>(alpha * 10));
    std::vector<double> x(static_cast<std::size_t>(k));
    std::vector<std::vector<double>> draws(static_cast<std::size_t>(k), std::vector<double>(static_cast<std::size_t>(n)));
    double worst_sum = 0.0;
    bool nonnegative = true;
    for (long i = 0; i < n; ++i) {
      sample_dirichlet(rng, alpha, k, x.data());
      double s = 0.0;
      for (int j = 0; j < k; ++j) {
        s += x[static_cast<std::size_t>(j)];
        nonnegative = nonnegative && x[static_cast<std::size_t>(j)] >= 0.0;
        draws[static_cast<std::size_t>(j)][static_cast<std::size_t>(i)] = x[static_cast<std::size_t>(j)];
      }
      worst_sum = std::max(worst_sum, std::abs(s - 1.0));
    }
    CHECK(nonnegative);
    CHECK(worst_sum <= 1e-12);
    const double mean = 1.0 / k;
    const double var = (k - 1.0) / (k * k * (k * alpha + 1.0));
    for (int j = 0; j < k; ++j) {
      const auto& d = draws[static_cast<std::size_t>(j)];
      double m1 = 0.0;
      for (double v : d) m1 += v;
      m1 /= static_cast<double>(n);
      double m2 = 0.0, m4 = 0.0;
      for (double v : d) {
        const double c = v - m1;
        m2 += c * c;
        m4 += c * c * c * c;
      }
      const double s2 = m2 / static_cast<double>(n - 1);
      m4 /= static_cast<double>(n);
      INFO("component " << j << ": mean " << m1 << " (want " << mean << "), variance " << s2 << " (want " << var << ")");
      CHECK(std::abs(m1 - mean) <= 5.0 * std::sqrt(var / static_cast<double>(n)));
      CHECK(std::abs(s2 - var) <= 5.0 * std::sqrt((m4 - s2 * s2) / static_cast<double>(n)));
    }
  }
}

TEST_CASE("sampling: Dirichlet with tiny alpha still returns a probability vector", "[sampling]") {
  // sampling.hpp: as alpha -> 0 every gamma draw may underflow; the documented limit is a one-hot vector.
  Engine rng(3);
  std::vector<double> x(5);
  for (double alpha : {1e-3, 1e-6, 1e-12}) {
    INFO("alpha=" << alpha);
    for (int i = 0; i < 200; ++i) {
      sample_dirichlet(rng, alpha, 5, x.data());
      double s = 0.0;
      for (double v : x) {
        CHECK(v >= 0.0);
        s += v;
      }
      CHECK(std::abs(s - 1.0) <= 1e-12);
    }
  }
}

TEST_CASE("sampling: Dirichlet with unequal alphas has the closed-form mean and variance", "[sampling]") {
  // Kotz, Balakrishnan and Johnson 2000, ch. 49: with a0 = sum_j alpha_j, component j has mean
  // alpha_j / a0 and variance alpha_j (a0 - alpha_j) / (a0^2 (a0 + 1)). Tolerances as above (5 standard
  // errors; the variance's from the sample's fourth central moment, *common practice*).
  const std::vector<double> alpha{2.0, 0.5, 1.0, 30.0};
  const double a0 = 33.5;
  const long n = 20000;
  Engine rng(77);
  std::vector<double> x(alpha.size());
  std::vector<std::vector<double>> draws(alpha.size(), std::vector<double>(static_cast<std::size_t>(n)));
  for (long i = 0; i < n; ++i) {
    sample_dirichlet(rng, alpha.data(), static_cast<int>(alpha.size()), x.data());
    double s = 0.0;
    for (std::size_t j = 0; j < alpha.size(); ++j) {
      s += x[j];
      draws[j][static_cast<std::size_t>(i)] = x[j];
    }
    REQUIRE(std::abs(s - 1.0) <= 1e-12);
  }
  for (std::size_t j = 0; j < alpha.size(); ++j) {
    const double mean = alpha[j] / a0, var = alpha[j] * (a0 - alpha[j]) / (a0 * a0 * (a0 + 1.0));
    double m1 = 0.0;
    for (double v : draws[j]) m1 += v;
    m1 /= static_cast<double>(n);
    double m2 = 0.0, m4 = 0.0;
    for (double v : draws[j]) {
      m2 += (v - m1) * (v - m1);
      m4 += std::pow(v - m1, 4);
    }
    const double s2 = m2 / static_cast<double>(n - 1);
    m4 /= static_cast<double>(n);
    INFO("component " << j << ": mean " << m1 << " (want " << mean << "), variance " << s2 << " (want " << var << ")");
    CHECK(std::abs(m1 - mean) <= 5.0 * std::sqrt(var / static_cast<double>(n)));
    CHECK(std::abs(s2 - var) <= 5.0 * std::sqrt((m4 - s2 * s2) / static_cast<double>(n)));
  }
  // Alphas so small that every Gamma draw underflows: the limit, a one-hot vector.
  const std::vector<double> tiny{1e-300, 2e-300, 1e-300};
  for (int i = 0; i < 50; ++i) {
    sample_dirichlet(rng, tiny.data(), 3, x.data());
    CHECK(x[0] + x[1] + x[2] == 1.0);
  }
}

// =============================================================================================
// Categorical.

TEST_CASE("sampling: categorical sampler passes a chi-square goodness-of-fit test", "[sampling]") {
  // Pearson's chi-square test (*common practice*); critical value: the 0.999 quantile of chi-square with
  // (cells - 1) degrees of freedom from Boost.Math. Fixed seeds, n = 60000 draws.
  const long n = 60000;
  const std::vector<std::vector<double>> cases = {
      {0.05, 0.10, 0.20, 0.30, 0.15, 0.20},
      {0.25, 0.0, 0.5, 0.25},  // a zero cell must never be drawn
      {0.001, 0.999},
  };
  std::uint64_t seed = 17;
  for (const auto& p : cases) {
    Engine rng(seed++);
    std::vector<long> counts(p.size(), 0);
    long out_of_range = 0;
    for (long i = 0; i < n; ++i) {
      const int c = sample_categorical(rng, p.data(), static_cast<int>(p.size()));
      if (c < 0 || c >= static_cast<int>(p.size())) ++out_of_range;
      else ++counts[static_cast<std::size_t>(c)];
    }
    REQUIRE(out_of_range == 0);
    for (std::size_t i = 0; i < p.size(); ++i)
      if (p[i] == 0.0) CHECK(counts[i] == 0);
    const auto [x2, cells] = smp_chi_square(counts, p, n);
    const double critical = boost::math::quantile(boost::math::chi_squared(cells - 1), 0.999);
    INFO("chi-square " << x2 << " on " << cells - 1 << " df, critical " << critical);
    CHECK(x2 < critical);
  }
}

TEST_CASE("sampling: categorical_from_uniform follows its inverse-transform contract", "[sampling]") {
  // Contract of sampling.hpp: smallest i with u < p[0] + ... + p[i]; the last index with positive mass
  // when rounding leaves u above the total. Expected indices worked by hand.
  const double p[] = {0.2, 0.3, 0.5};
  CHECK(categorical_from_uniform(0.0, p, 3) == 0);
  CHECK(categorical_from_uniform(0.19999, p, 3) == 0);
  CHECK(categorical_from_uniform(0.2, p, 3) == 1);  // 0.2 < 0.2 is false
  CHECK(categorical_from_uniform(0.49999, p, 3) == 1);
  CHECK(categorical_from_uniform(0.5, p, 3) == 2);  // 0.2 + 0.3 == 0.5 exactly in binary64
  CHECK(categorical_from_uniform(std::nextafter(1.0, 0.0), p, 3) == 2);
  const double q[] = {0.0, 0.5, 0.5, 0.0};
  CHECK(categorical_from_uniform(0.0, q, 4) == 1);  // zero mass is never picked
  CHECK(categorical_from_uniform(std::nextafter(1.0, 0.0), q, 4) == 2);
  // Ten times 0.1 sums to 0.99999999999999989 in binary64, short of 1: u = that total is >= every
  // cumulative sum, so the last index with positive mass (9) must come back, not the empty cell 10.
  std::vector<double> tenth(11, 0.1);
  tenth[10] = 0.0;
  double total = 0.0;
  for (int i = 0; i < 10; ++i) total += tenth[static_cast<std::size_t>(i)];
  REQUIRE(total < 1.0);  // rounding leaves the cumulative sum short of 1
  CHECK(categorical_from_uniform(total, tenth.data(), 11) == 9);  // u >= total: last positive index, not 10
}

// =============================================================================================
// Synthetic family.

TEST_CASE("sampling: synthetic emissions have the stated form", "[sampling]") {
  // docs/design.md, "The synthetic family": E(s, .) = (1 - noise) onehot(s mod |O|) + noise Dirichlet(1): row s puts at least
  // 1 - noise on s mod |O|, rows sum to 1; p0 and T[a] rows are probability vectors; r(o) in [0, 1).
  for (double noise : {0.0, 0.3, 1.0}) {
    INFO("noise=" << noise);
    SyntheticFamily f;
    f.states = 5;
    f.actions = 2;
    f.observations = 3;
    f.dynamics_concentration = 0.5;
    f.observation_noise = noise;
    Engine rng(static_cast<std::uint64_t>(noise * 100) + 1);
    for (int draw = 0; draw < 20; ++draw) {
      const Pomdp m = draw_pomdp(f, 4, 1.0, rng);
      CHECK(validate(m, 1e-12).empty());
      CHECK(m.horizon == 4);
      for (int s = 0; s < f.states; ++s) {
        CHECK(m.emissions(s, s % f.observations) >= 1.0 - noise - 1e-12);
        if (noise == 0.0)
          for (int o = 0; o < f.observations; ++o) CHECK(m.emissions(s, o) == (o == s % f.observations ? 1.0 : 0.0));
      }
      for (int o = 0; o < f.observations; ++o) {
        CHECK(m.rewards(o) >= 0.0);
        CHECK(m.rewards(o) < 1.0);
      }
    }
  }
}

// =============================================================================================
// Logging policy.

TEST_CASE("sampling: logging policy on a hand-solved two-state problem", "[sampling]") {
  // Two states, E = identity, r = (0, 1), action 0 stays, action 1 swaps, Q discount 0.9.
  // By hand (Bellman optimality, Sutton and Barto 2018 eq. 3.20): V(1) = 1 + 0.9 V(1) = 10, staying in
  // state 1 being optimal; V(0) = Q(0, swap) = 1 + 0.9 * 10 = 10; Q(0, stay) = 0 + 0.9 V(0) = 9;
  // Q(1, swap) = 0 + 0.9 V(0) = 9; Q(1, stay) = 10. So Q = [[9, 10], [10, 9]].
  Pomdp m;
  m.states = 2;
  m.actions = 2;
  m.observations = 2;
  m.initial = Vector::Constant(2, 0.5);
  Matrix stay(2, 2), swap(2, 2);
  stay << 1, 0, 0, 1;
  swap << 0, 1, 1, 0;
  m.transitions = {stay, swap};
  m.emissions = stay;
  m.rewards.resize(2);
  m.rewards << 0.0, 1.0;
  m.discount = 1.0;  // the environment's discount is not the logger's
  const Matrix Q = optimal_state_action_values(m, 0.9);
  CHECK(Q(0, 0) == Approx(9.0).epsilon(1e-10));
  CHECK(Q(0, 1) == Approx(10.0).epsilon(1e-10));
  CHECK(Q(1, 0) == Approx(10.0).epsilon(1e-10));
  CHECK(Q(1, 1) == Approx(9.0).epsilon(1e-10));
  // pi_log = privilege softmax(Q / temperature) + (1 - privilege)/|A| (docs/design.md, "Logged regime"); with a Q gap of 1
  // and temperature 0.5 the preferred action has softmax weight e^2 / (1 + e^2).
  LoggingSettings ls;
  ls.privilege = 0.8;
  ls.temperature = 0.5;
  ls.q_discount = 0.9;
  const Matrix pi = privileged_logging_policy(m, ls);
  const double w = std::exp(2.0) / (1.0 + std::exp(2.0));
  CHECK(pi(0, 1) == Approx(0.8 * w + 0.1).epsilon(1e-10));
  CHECK(pi(0, 0) == Approx(0.8 * (1.0 - w) + 0.1).epsilon(1e-10));
  CHECK(pi(1, 0) == Approx(0.8 * w + 0.1).epsilon(1e-10));
  CHECK(pi(1, 1) == Approx(0.8 * (1.0 - w) + 0.1).epsilon(1e-10));
}

TEST_CASE("sampling: logging policy rows match the formula with independently computed Q", "[sampling]") {
  // Q by the value iteration above (Sutton and Barto 2018 eq. 3.20, 3000 sweeps: error <= 0.9^3000 ~ 0);
  // pi_log = privilege * softmax(Q / temperature) + (1 - privilege)/|A| (docs/design.md, "Logged regime").
  Engine rng(2024);
  for (int A : {2, 3}) {
    Pomdp m;
    m.states = 3;
    m.actions = A;
    m.observations = 2;
    m.initial = Vector::Constant(3, 1.0 / 3.0);
    m.transitions.assign(static_cast<std::size_t>(A), Matrix(3, 3));
    for (auto& T : m.transitions)
      for (int s = 0; s < 3; ++s) smp_random_row(rng, T.row(s));
    m.emissions.resize(3, 2);
    for (int s = 0; s < 3; ++s) smp_random_row(rng, m.emissions.row(s));
    m.rewards.resize(2);
    m.rewards << 0.2, 0.9;
    for (double qd : {0.0, 0.5, 0.9}) {
      INFO("A=" << A << " q_discount=" << qd);
      const auto Qref = smp_value_iteration(m, qd, 3000);
      const Matrix Q = optimal_state_action_values(m, qd);
      for (int s = 0; s < 3; ++s)
        for (int a = 0; a < A; ++a) CHECK(std::abs(Q(s, a) - Qref[static_cast<std::size_t>(s)][static_cast<std::size_t>(a)]) <= 1e-9);
      for (double privilege : {0.0, 0.5, 0.9, 1.0})
        for (double temperature : {0.05, 0.2, 1.0}) {
          LoggingSettings ls;
          ls.privilege = privilege;
          ls.temperature = temperature;
          ls.q_discount = qd;
          const Matrix pi = privileged_logging_policy(m, ls);
          for (int s = 0; s < 3; ++s) {
            double z = 0.0;
            std::vector<double> e(static_cast<std::size_t>(A));
            for (int a = 0; a < A; ++a) z += (e[static_cast<std::size_t>(a)] = std::exp(Qref[static_cast<std::size_t>(s)][static_cast<std::size_t>(a)] / temperature));
            for (int a = 0; a < A; ++a) {
              const double want = privilege * e[static_cast<std::size_t>(a)] / z + (1.0 - privilege) / A;
              CHECK(std::abs(pi(s, a) - want) <= 1e-9);
              if (privilege == 0.0) CHECK(pi(s, a) == 1.0 / A);  // exactly uniform
            }
            CHECK(std::abs(pi.row(s).sum() - 1.0) <= 1e-12);
          }
        }
    }
  }
}
