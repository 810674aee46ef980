#include "core/running/runner.hpp"

#include <map>
#include <memory>
#include <mutex>
#include <thread>

#include "core/running/stop.hpp"

namespace dobudget {

void run_units(const Study& study, const std::vector<UnitId>& units, const std::vector<std::size_t>& todo, int threads,
               const RunnerHooks& hooks) {
  // One draw context per (scenario, draw), built by whichever thread needs it first and released
  // after the last unit of that draw in `todo` (remaining counts, under `deliver`).
  struct Slot {
    std::once_flag once;
    std::shared_ptr<const DrawContext> context;
    std::size_t remaining = 0;
  };
  std::map<std::pair<int, int>, std::unique_ptr<Slot>> slots;
  for (std::size_t i : todo) {
    auto& p = slots[{units[i].scenario, units[i].draw}];
    if (!p) p = std::make_unique<Slot>();
    ++p->remaining;
  }
  const StopToken stop = hooks.stop_requested ? StopToken(hooks.stop_requested) : StopToken();
  std::atomic<std::size_t> next{0};
  std::mutex deliver;
  std::exception_ptr failure;
  auto work = [&] {
    try {
      while (true) {
        if (stop.requested()) return;
        {
          std::lock_guard lock(deliver);
          if (failure) return;
        }
        const std::size_t k = next.fetch_add(1);
        if (k >= todo.size()) return;
        const UnitId& u = units[todo[k]];
        Slot& slot = *slots.at({u.scenario, u.draw});
        std::call_once(slot.once, [&] {
          slot.context = std::make_shared<const DrawContext>(make_draw_context(study, u.scenario, u.draw, stop));
        });
        std::shared_ptr<const DrawContext> context;
        {
          std::lock_guard lock(deliver);
          context = slot.context;
        }
        auto rows = run_unit(study, u, *context, stop);
        std::lock_guard lock(deliver);
        if (--slot.remaining == 0) slot.context.reset();  // the last unit of this draw is done
        if (hooks.on_unit) hooks.on_unit(todo[k], std::move(rows));
      }
    } catch (const Cancelled&) {
      return;  // a stop was requested part-way through a unit: it is dropped, not delivered
    } catch (...) {
      std::lock_guard lock(deliver);
      if (!failure) failure = std::current_exception();
    }
  };
  const int n = std::max(1, std::min<int>(threads, static_cast<int>(todo.size())));
  std::vector<std::thread> pool;
  for (int t = 1; t < n; ++t) pool.emplace_back(work);
  work();
  for (auto& t : pool) t.join();
  if (failure) std::rethrow_exception(failure);
}

}  // namespace dobudget
