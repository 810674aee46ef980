// Runs units on a pool of threads. Units are independent and every random stream is keyed by the
// unit, so results do not depend on the number of threads or on which thread ran what; the
// caller receives each finished unit and is responsible for writing in canonical order.
#pragma once
#include <atomic>
#include <cstddef>
#include <functional>
#include <vector>

#include "core/run_record.hpp"
#include "core/settings.hpp"
#include "core/unit.hpp"

namespace dobudget {

struct RunnerHooks {
  // Called once per finished unit, serialised (never two at once), from a worker thread.
  std::function<void(std::size_t unit_index, std::vector<RunRecord>&& rows)> on_unit;
  // Polled between units; when it returns true no new unit is started.
  std::function<bool()> stop_requested;
};

// Runs units[i] for every i in `todo` (indices into `units`) on `threads` threads.
void run_units(const Study& study, const std::vector<UnitId>& units, const std::vector<std::size_t>& todo, int threads,
               const RunnerHooks& hooks);

}  // namespace dobudget
