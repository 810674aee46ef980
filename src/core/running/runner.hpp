// Runs units on a pool of threads. Units are independent and every random stream is keyed by the
// unit, so results do not depend on the number of threads or on which thread ran what; the
// caller receives each finished unit and is responsible for writing in canonical order.
#pragma once
#include <atomic>
#include <cstddef>
#include <functional>
#include <vector>

#include "core/running/run_record.hpp"
#include "core/running/settings.hpp"
#include "core/running/unit.hpp"

namespace dobudget {

struct RunnerHooks {
  // Called once per finished unit, serialised (never two at once), from a worker thread.
  std::function<void(std::size_t unit_index, std::vector<RunRecord>&& rows)> on_unit;
  // Polled between units, and inside each unit (stop.hpp: between EM evaluations, in model_kl, the
  // planner and rollouts), from every worker thread at once: it must be thread-safe (read an
  // atomic). When it returns true no new unit is started and the units in progress are abandoned:
  // they throw Cancelled, are never passed to on_unit, and run_units returns normally.
  std::function<bool()> stop_requested;
};

// Runs units[i] for every i in `todo` (indices into `units`) on `threads` threads. A draw's
// context (environment, return_gap reference) is built by the first unit of the draw that starts
// and released when the last one of `todo` has finished, so at most about `threads` are alive.
void run_units(const Study& study, const std::vector<UnitId>& units, const std::vector<std::size_t>& todo, int threads,
               const RunnerHooks& hooks);

}  // namespace dobudget
