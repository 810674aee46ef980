// Test fixture: a RunRecord with the keys and measures a test needs (the other fields default).
#pragma once
#include <optional>

#include "core/running/run_record.hpp"

namespace dobudget::test {

inline RunRecord make_record(int scenario, int environment, int replicate, Strategy strategy, int logged, int pilot,
                             std::optional<double> model_kl, std::optional<double> return_gap = std::nullopt) {
  RunRecord r;
  r.scenario = scenario;
  r.environment = environment;
  r.replicate = replicate;
  r.strategy = strategy;
  r.logged = logged;
  r.pilot = pilot;
  r.model_kl = model_kl;
  r.return_gap = return_gap;
  return r;
}

}  // namespace dobudget::test
