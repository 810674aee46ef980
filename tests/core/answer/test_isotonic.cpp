// Weighted isotonic regression (pool-adjacent-violators), src/core/answer/isotonic.hpp.
#include <catch2/catch.hpp>

#include <boost/random/mersenne_twister.hpp>
#include <boost/random/uniform_int_distribution.hpp>
#include <boost/random/uniform_real_distribution.hpp>
#include <cmath>
#include <limits>
#include <vector>

#include "core/answer/isotonic.hpp"

using dobudget::isotonic_decreasing;
using dobudget::isotonic_increasing;

namespace {

// Independent reference: exhaustive search over the 2^(n-1) partitions of 1..n into consecutive
// blocks. Barlow, Bartholomew, Bremner and Brunk, "Statistical Inference under Order
// Restrictions" (1972), ch. 1: the weighted L2 projection onto non-decreasing sequences is piecewise
// constant, each block taking the weighted mean of its inputs. Every partition whose block means
// are non-decreasing gives a feasible (monotone) vector, and the projection is one of them, so the
// feasible candidate of least weighted squared error is the projection (unique: strictly convex).
std::vector<double> brute_force_isotonic(const std::vector<double>& y, const std::vector<double>& w) {
  const std::size_t n = y.size();
  std::vector<double> best;
  double best_sse = std::numeric_limits<double>::infinity();
  for (unsigned mask = 0; mask < (1u << (n - 1)); ++mask) {  // bit i set: a block ends after index i
    std::vector<double> fit(n);
    std::size_t start = 0;
    double prev = -std::numeric_limits<double>::infinity();
    bool feasible = true;
    for (std::size_t i = 0; i < n && feasible; ++i) {
      const bool end = (i == n - 1) || (mask & (1u << i));
      if (!end) continue;
      double sw = 0, swy = 0;
      for (std::size_t j = start; j <= i; ++j) {
        sw += w[j];
        swy += w[j] * y[j];
      }
      const double mean = swy / sw;
      if (mean < prev) feasible = false;
      prev = mean;
      for (std::size_t j = start; j <= i; ++j) fit[j] = mean;
      start = i + 1;
    }
    if (!feasible) continue;
    double sse = 0;
    for (std::size_t j = 0; j < n; ++j) sse += w[j] * (y[j] - fit[j]) * (y[j] - fit[j]);
    if (sse < best_sse) {
      best_sse = sse;
      best = fit;
    }
  }
  return best;
}

}  // namespace

TEST_CASE("PAVA reproduces hand-worked examples", "[isotonic]") {
  // Worked by hand from the PAVA pooling rule (Barlow et al. 1972, ch. 1; de Leeuw, Hornik and
  // Mair, J. Stat. Softw. 32(5), 2009, sec. 2); not copied from a published table.
  {
    // (1, 3, 2, 4, 3, 5), unit weights: pool (3,2) -> 2.5 and (4,3) -> 3.5.
    const std::vector<double> y{1, 3, 2, 4, 3, 5}, w(6, 1.0);
    const auto f = isotonic_increasing(y, w);
    const std::vector<double> expect{1, 2.5, 2.5, 3.5, 3.5, 5};
    for (std::size_t i = 0; i < y.size(); ++i) CHECK(f[i] == Approx(expect[i]).margin(1e-15));
  }
  {
    // (5, 1, 2): pool (5,1) -> 3, then 2 < 3 pools all: 8/3 (a cascade of two poolings).
    const std::vector<double> y{5, 1, 2}, w(3, 1.0);
    const auto f = isotonic_increasing(y, w);
    for (double v : f) CHECK(v == Approx(8.0 / 3.0).margin(1e-15));
  }
  {
    // Weighted: (4, 2, 3) with weights (1, 3, 1): pool (4,2) -> (4*1 + 2*3)/4 = 2.5; 3 >= 2.5 stays.
    const std::vector<double> y{4, 2, 3}, w{1, 3, 1};
    const auto f = isotonic_increasing(y, w);
    CHECK(f[0] == Approx(2.5).margin(1e-15));
    CHECK(f[1] == Approx(2.5).margin(1e-15));
    CHECK(f[2] == Approx(3.0).margin(1e-15));
  }
  {
    // Decreasing fit of (0.3, 0.1, 0.2) = -(increasing fit of (-0.3, -0.1, -0.2)) = (0.3, 0.15, 0.15).
    const std::vector<double> y{0.3, 0.1, 0.2}, w(3, 1.0);
    const auto f = isotonic_decreasing(y, w);
    CHECK(f[0] == Approx(0.3).margin(1e-15));
    CHECK(f[1] == Approx(0.15).margin(1e-15));
    CHECK(f[2] == Approx(0.15).margin(1e-15));
  }
  // Already monotone input is returned unchanged; empty and single inputs are fine (*common practice*).
  {
    const std::vector<double> y{0.1, 0.1, 0.4, 0.9}, w{2, 1, 5, 1};
    CHECK(isotonic_increasing(y, w) == y);
    CHECK(isotonic_increasing(std::vector<double>{}, std::vector<double>{}).empty());
    CHECK(isotonic_increasing(std::vector<double>{7.0}, std::vector<double>{3.0}) == std::vector<double>{7.0});
  }
}

TEST_CASE("PAVA matches an exhaustive search over block partitions", "[isotonic]") {
  // Reference: brute_force_isotonic above (independent of the pooling algorithm).
  boost::random::mt19937_64 rng(20240601);
  boost::random::uniform_int_distribution<int> size(1, 8), small(0, 4);
  boost::random::uniform_real_distribution<double> value(-1.0, 1.0), weight(0.1, 5.0);
  for (int trial = 0; trial < 600; ++trial) {
    const int n = size(rng);
    std::vector<double> y(n), w(n);
    for (int i = 0; i < n; ++i) {
      // Every third trial uses few distinct values, to exercise ties.
      y[i] = trial % 3 == 0 ? small(rng) : value(rng);
      w[i] = trial % 2 == 0 ? 1.0 : weight(rng);
    }
    const auto f = isotonic_increasing(y, w);
    const auto ref = brute_force_isotonic(y, w);
    REQUIRE(ref.size() == f.size());
    for (int i = 0; i < n; ++i) CHECK(f[i] == Approx(ref[i]).margin(1e-12));
    // Decreasing fit: the reference applied to -y, negated.
    std::vector<double> neg(n);
    for (int i = 0; i < n; ++i) neg[i] = -y[i];
    const auto fd = isotonic_decreasing(y, w);
    const auto refd = brute_force_isotonic(neg, w);
    for (int i = 0; i < n; ++i) CHECK(fd[i] == Approx(-refd[i]).margin(1e-12));
  }
}

TEST_CASE("PAVA output properties on random inputs", "[isotonic]") {
  // Properties of the isotonic projection (Barlow et al. 1972, ch. 1; de Leeuw et al. 2009, sec. 2):
  // monotone, each constant block equals the weighted mean of its inputs, and the weighted sum is
  // preserved (the constant vector lies in the cone, so the residual is orthogonal to it).
  boost::random::mt19937_64 rng(7);
  boost::random::uniform_int_distribution<int> size(1, 60), small(0, 3);
  boost::random::uniform_real_distribution<double> value(-10.0, 10.0), weight(0.01, 20.0);
  dobudget::IsotonicWorkspace ws;  // reused across calls, as in the bootstrap
  for (int trial = 0; trial < 2000; ++trial) {
    const int n = size(rng);
    std::vector<double> y(n), w(n), f(n);
    for (int i = 0; i < n; ++i) {
      y[i] = trial % 4 == 0 ? small(rng) : value(rng);
      w[i] = weight(rng);
    }
    isotonic_increasing(y, w, f, ws);
    double sum_in = 0, sum_out = 0;
    for (int i = 0; i < n; ++i) {
      sum_in += w[i] * y[i];
      sum_out += w[i] * f[i];
      if (i > 0) CHECK(f[i] >= f[i - 1]);
    }
    CHECK(sum_out == Approx(sum_in).margin(1e-9));
    // Blocks: maximal runs of equal fitted values.
    int start = 0;
    for (int i = 1; i <= n; ++i) {
      if (i < n && f[i] == f[start]) continue;
      double sw = 0, swy = 0;
      for (int j = start; j < i; ++j) {
        sw += w[j];
        swy += w[j] * y[j];
      }
      CHECK(f[start] == Approx(swy / sw).margin(1e-10));
      start = i;
    }
    // Decreasing fit is non-increasing and also preserves the weighted sum.
    isotonic_decreasing(y, w, f, ws);
    double sum_dec = 0;
    for (int i = 0; i < n; ++i) {
      sum_dec += w[i] * f[i];
      if (i > 0) CHECK(f[i] <= f[i - 1]);
    }
    CHECK(sum_dec == Approx(sum_in).margin(1e-9));
  }
}

TEST_CASE("PAVA rejects bad input", "[isotonic]") {
  // *common practice*: weights must be positive, lengths must agree.
  const std::vector<double> y{1, 2}, w0{1, 0}, w1{1};
  CHECK_THROWS_AS(isotonic_increasing(y, w0), std::invalid_argument);
  CHECK_THROWS_AS(isotonic_increasing(y, w1), std::invalid_argument);
  const std::vector<double> ynan{1, std::nan("")}, w{1, 1};
  CHECK_THROWS_AS(isotonic_increasing(ynan, w), std::invalid_argument);
}
