// Plausible worlds from the records (src/core/world/posterior_world.hpp): each row is drawn from
// Dirichlet(expected counts + c). Checks:
//   * with a huge record, the worlds' rows concentrate on the fitted rows (Dirichlet variance
//     a_j (a_0 - a_j) / (a_0^2 (a_0 + 1)) with a_0 = sum_j a_j; Kotz, Balakrishnan and Johnson,
//     "Continuous Multivariate Distributions", vol. 1, 2nd ed., 2000, ch. 49);
//   * for an action the loggers never take in some latent value (and no pilot episodes), the
//     worlds' rows of that pair follow the prior Dirichlet(c, ..., c): mean 1/k and variance
//     (k - 1) / (k^2 (k c + 1)) (same reference), for two values of c.
#include <catch2/catch.hpp>

#include <cmath>
#include <vector>

#include "core/fitting/evidence.hpp"
#include "core/fitting/model_selection.hpp"
#include "core/world/dataset.hpp"
#include "core/world/posterior_world.hpp"
#include "../../two_state_world.hpp"

using namespace dobudget;

namespace {

// 2 hidden states, 2 actions, 3 symbols (numbers chosen here); the logger never takes action 1 in
// state 0, and always takes it in state 1.
Environment silent_pair_environment(int horizon) { return test::two_state_world({horizon, 0.6, 0.85, 0.75, 1.0, 0.4, false}); }

}  // namespace

TEST_CASE("posterior worlds concentrate on the fitted rows with a huge record", "[posterior_world]") {
  const Environment env = silent_pair_environment(8);
  Engine rng(21);
  const Dataset logged = simulate(env, Regime::logged, 4000, rng);
  const Dataset pilot = simulate(env, Regime::pilot, 4000, rng);
  FitSettings f;
  f.latent_states = 2;
  SelectionSettings sel;
  sel.sizes = {2};
  sel.folds = 0;
  const Selection s = select_latent_states(logged, pilot, env.model, f, sel, 3);
  const FitResult& fitted = s.best().fit;
  RecordsPosterior p{fitted.model, fitted.decision, combined(expected_counts_by_regime(fitted.model, fitted.decision, logged, pilot))};
  const double concentration = 1.0;
  Engine draw_rng(4);
  double worst = 0.0, worst_sd = 0.0;
  for (int k = 0; k < 20; ++k) {
    const Environment w = draw_plausible_world(p, concentration, draw_rng);
    REQUIRE(validate(w).empty());
    for (int a = 0; a < 2; ++a)
      for (int z = 0; z < 2; ++z)
        for (int j = 0; j < 2; ++j) {
          const auto& row = p.counts.transitions[static_cast<std::size_t>(a)].row(z);
          const double a0 = row.sum() + 2 * concentration, aj = row(j) + concentration;
          const double sd = std::sqrt(aj * (a0 - aj) / (a0 * a0 * (a0 + 1)));
          const double dev = std::abs(w.model.transitions[static_cast<std::size_t>(a)](z, j) -
                                      fitted.model.transitions[static_cast<std::size_t>(a)](z, j));
          // Within 5 sd of the Dirichlet plus the gap between the MAP row and the posterior mean
          // (both O(1/N)).
          CHECK(dev <= 5 * sd + 2.0 / a0);
          worst = std::max(worst, dev);
          worst_sd = std::max(worst_sd, sd);
        }
    for (int z = 0; z < 2; ++z)
      for (int o = 0; o < 3; ++o) CHECK(std::abs(w.model.emissions(z, o) - fitted.model.emissions(z, o)) < 0.02);
  }
  INFO("largest deviation " << worst << ", largest sd " << worst_sd);
  CHECK(worst < 0.05);  // concentrated: a world drawn from the prior alone would differ by ~0.3
}

TEST_CASE("posterior worlds follow the prior for an action never taken in a latent value", "[posterior_world]") {
  const Environment env = silent_pair_environment(6);
  Engine rng(8);
  const Dataset logged = simulate(env, Regime::logged, 3000, rng);
  const Dataset none;  // no pilot episodes
  // The E-step at the true model: P(z_t = 0 | episode) is 0 wherever a_t = 1, so the transition
  // counts of (z = 0, a = 1) are exactly 0.
  const RegimeCounts rc = expected_counts_by_regime(env.model, env.logging_policy, logged, none);
  REQUIRE(transition_evidence(rc).logged(0, 1) == 0.0);
  for (double c : {1.0, 5.0}) {
    RecordsPosterior p{env.model, env.logging_policy, combined(rc)};
    Engine draw_rng(static_cast<std::uint64_t>(40 + c));
    const int n = 4000;
    double sum = 0.0, sum2 = 0.0, informed = 0.0, informed2 = 0.0;
    for (int k = 0; k < n; ++k) {
      const Environment w = draw_plausible_world(p, c, draw_rng);
      const double x = w.model.transitions[1](0, 0);
      sum += x;
      sum2 += x * x;
      const double y = w.model.transitions[0](0, 0);  // a pair with plenty of evidence
      informed += y;
      informed2 += y * y;
    }
    const double mean = sum / n, var = sum2 / n - mean * mean;
    const double k = 2;
    const double want_mean = 1 / k, want_var = (k - 1) / (k * k * (k * c + 1));
    INFO("c = " << c << ": mean " << mean << " var " << var << " (Dirichlet: " << want_mean << ", " << want_var << ")");
    // Standard error of the mean sqrt(var / n); of the variance about var sqrt(2 / n) (the Beta's
    // kurtosis is below the normal's, so this bound is conservative).
    CHECK(std::abs(mean - want_mean) <= 4 * std::sqrt(want_var / n));
    CHECK(std::abs(var - want_var) <= 4 * want_var * std::sqrt(2.0 / n));
    // The informed pair does not follow the prior: its spread is far below the prior's.
    const double ivar = informed2 / n - (informed / n) * (informed / n);
    CHECK(ivar < want_var / 50);
    CHECK(informed / n == Approx(0.85).margin(0.02));
  }
}
