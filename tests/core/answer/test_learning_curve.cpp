// Learning-curve fit e(n) = c + a n^(-b), src/core/answer/learning_curve.hpp.
#include <catch2/catch.hpp>

#include <boost/random/mersenne_twister.hpp>
#include <boost/random/normal_distribution.hpp>
#include <cmath>
#include <vector>

#include "core/answer/learning_curve.hpp"

using dobudget::fit_learning_curve;
using dobudget::inverse_variance_weights;
using dobudget::LearningCurve;
using dobudget::LearningCurveOptions;

namespace {

const std::vector<double> kBudgets{10, 20, 50, 100, 200, 500, 1000, 2000, 5000, 10000};

double curve(double c, double a, double b, double n) { return c + a * std::pow(n, -b); }

}  // namespace

TEST_CASE("learning curve: exact points give back the parameters", "[learning_curve]") {
  // Noise-free points of the model itself: the global least-squares optimum is the generating
  // (c, a, b) with RSS 0 (*common practice* for checking a fitter). Tolerance: Brent's method
  // stops at half the double mantissa in b (about 1e-8 relative), so 1e-6 on every parameter.
  struct Case {
    double c, a, b;
  };
  for (const Case& k : {Case{0.05, 2.0, 0.7}, Case{0.0, 1.0, 1.0}, Case{0.2, 0.5, 0.3}, Case{0.01, 3.0, 2.5}}) {
    std::vector<double> y, w(kBudgets.size(), 1.0);
    for (double n : kBudgets) y.push_back(curve(k.c, k.a, k.b, n));
    const auto fit = fit_learning_curve(kBudgets, y, w);
    REQUIRE(fit);
    CHECK(fit->c == Approx(k.c).margin(1e-6));
    CHECK(fit->a == Approx(k.a).epsilon(1e-6));
    CHECK(fit->b == Approx(k.b).epsilon(1e-6));
    CHECK(fit->rss < 1e-12);
  }
  // Three budgets are enough for three parameters.
  const std::vector<double> n3{10, 100, 1000};
  std::vector<double> y3, w3(3, 1.0);
  for (double n : n3) y3.push_back(curve(0.03, 1.5, 0.8, n));
  const auto fit3 = fit_learning_curve(n3, y3, w3);
  REQUIRE(fit3);
  CHECK(fit3->c == Approx(0.03).margin(1e-6));
  CHECK(fit3->b == Approx(0.8).epsilon(1e-5));
}

TEST_CASE("learning curve: noisy replicates recover known parameters", "[learning_curve]") {
  // Synthetic replicates: at each budget m = 40 replicate values e(n) (1 + 0.1 Z), Z standard
  // normal (heteroscedastic like a KL divergence), fitted to the per-budget means with the
  // inverse-variance weights. True (c, a, b) = (0.05, 2, 0.7). Standard error of a mean at the
  // largest budget: 0.1 * 0.053 / sqrt(40) = 8e-4, so c is determined to about 1e-3.
  // Largest errors seen over these 20 seeds when the test was written: |c - 0.05| = 0.00095,
  // |b - 0.7| = 0.016, |a/2 - 1| = 0.048; the tolerances are about five times those:
  // |c - 0.05| < 0.005, |b - 0.7| < 0.08, |a/2 - 1| < 0.25.
  const double c0 = 0.05, a0 = 2.0, b0 = 0.7;
  const int m = 40;
  for (std::uint64_t seed = 1; seed <= 20; ++seed) {
    boost::random::mt19937_64 rng(seed);
    boost::random::normal_distribution<double> z;
    std::vector<double> mean, var, count;
    for (double n : kBudgets) {
      double s = 0, ss = 0;
      std::vector<double> v(m);
      for (double& x : v) {
        x = curve(c0, a0, b0, n) * (1.0 + 0.1 * z(rng));
        s += x;
      }
      const double mu = s / m;
      for (double x : v) ss += (x - mu) * (x - mu);
      mean.push_back(mu);
      var.push_back(ss / (m - 1));
      count.push_back(m);
    }
    std::vector<double> w(kBudgets.size());
    inverse_variance_weights(var, count, w);
    const auto fit = fit_learning_curve(kBudgets, mean, w);
    REQUIRE(fit);
    INFO("seed " << seed << ": c=" << fit->c << " a=" << fit->a << " b=" << fit->b);
    CHECK(std::abs(fit->c - c0) < 0.005);
    CHECK(std::abs(fit->b - b0) < 0.08);
    CHECK(std::abs(fit->a / a0 - 1.0) < 0.25);
  }
}

TEST_CASE("learning curve: constraints and the free floor", "[learning_curve]") {
  // Data from a curve with a negative floor: with the default c >= 0 the floor sits on the bound;
  // with a free floor the generating parameters come back (*common practice*: bound-constrained
  // least squares puts the estimate on the bound when the unconstrained optimum is outside).
  std::vector<double> y, w(kBudgets.size(), 1.0);
  for (double n : kBudgets) y.push_back(curve(-0.05, 1.0, 0.5, n));
  const auto bounded = fit_learning_curve(kBudgets, y, w);
  REQUIRE(bounded);
  CHECK(bounded->c == 0.0);
  LearningCurveOptions free_floor;
  free_floor.nonnegative_floor = false;
  const auto fit = fit_learning_curve(kBudgets, y, w, free_floor);
  REQUIRE(fit);
  CHECK(fit->c == Approx(-0.05).margin(1e-6));
  CHECK(fit->b == Approx(0.5).epsilon(1e-6));

  // Increasing data: a >= 0 forces a flat curve at the weighted mean.
  std::vector<double> up{0.1, 0.2, 0.3, 0.4};
  std::vector<double> nu{10, 100, 1000, 10000}, wu{1, 1, 1, 1};
  const auto flat = fit_learning_curve(nu, up, wu);
  REQUIRE(flat);
  CHECK(flat->a == 0.0);
  CHECK(flat->c == Approx(0.25).margin(1e-12));

  // Fewer than three distinct positive budgets: no fit.
  const std::vector<double> n2{10, 10, 100, 0}, y2{1, 1, 0.5, 2}, w2{1, 1, 1, 1};
  CHECK_FALSE(fit_learning_curve(n2, y2, w2));
}

TEST_CASE("learning curve: solving for the budget", "[learning_curve]") {
  // e(n) = c + a n^-b = eps  <=>  n = (a / (eps - c))^(1/b)  (algebra).
  LearningCurve k;
  k.c = 0.01;
  k.a = 1.0;
  k.b = 1.0;
  REQUIRE(k.solve(0.0105));
  CHECK(*k.solve(0.0105) == Approx(2000.0).epsilon(1e-12));
  CHECK(k(2000.0) == Approx(0.0105).epsilon(1e-12));
  CHECK_FALSE(k.solve(0.01));   // floor equal to the target: unreachable
  CHECK_FALSE(k.solve(0.005));  // floor above the target
  k.b = 0.5;
  CHECK(*k.solve(0.02) == Approx(10000.0).epsilon(1e-12));
  k.a = 0.0;
  CHECK(*k.solve(0.02) == 0.0);  // flat below the target: met everywhere
}

TEST_CASE("learning curve: inverse-variance weights", "[learning_curve]") {
  // w_i = 1 / max(var_i / m_i, 1e-6 max_j var_j / m_j), documented in learning_curve.hpp.
  const std::vector<double> var{4.0, 1.0, 0.0, 9.0}, m{4, 10, 10, 1};
  std::vector<double> w(4);
  inverse_variance_weights(var, m, w);
  CHECK(w[0] == Approx(1.0));         // 4 / 4 = 1 (the largest s)
  CHECK(w[1] == Approx(10.0));        // 1 / 10
  CHECK(w[2] == Approx(1e6));         // zero variance: the floor 1e-6 * 1
  CHECK(w[3] == Approx(1.0));         // one replicate: the largest s
  const std::vector<double> zero{0.0, 0.0};
  const std::vector<double> mz{5, 5};
  std::vector<double> wz(2);
  inverse_variance_weights(zero, mz, wz);
  CHECK(wz[0] == 1.0);
  CHECK(wz[1] == 1.0);
}
