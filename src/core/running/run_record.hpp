// One row of runs.csv: one (scenario, environment draw, replicate) x strategy x logged x pilot.
// docs/run-directory.md, "runs.csv".
#pragma once
#include <optional>
#include <string>

#include "core/fitting/strategy.hpp"

namespace dobudget {

struct RunRecord {
  int scenario = 0;
  int environment = 0;
  int replicate = 0;
  Strategy strategy = Strategy::pilot_only;
  int logged = 0;
  int pilot = 0;
  std::optional<double> model_kl;    // empty when not measured
  std::optional<double> return_gap;  // empty when not measured or when V* - V_uniform is too small
  double loglik = 0.0;               // final training log-likelihood (penalised objective without prior)
  int iterations = 0;
  bool converged = false;
  std::string note;                  // why a measure is empty, e.g. "no room for planning"; never contains a comma
  double fit_seconds = 0.0;          // wall clock: goes to timings.csv only
  int starts = 0;                    // EM starts the fit ran (warm and random; fit.hpp)
  bool confirmed = false;            // its best objective was reached by a second start
};

}  // namespace dobudget
