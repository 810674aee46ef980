#include "core/runner.hpp"

#include <map>
#include <memory>
#include <mutex>
#include <thread>

namespace dobudget {

void run_units(const Study& study, const std::vector<UnitId>& units, const std::vector<std::size_t>& todo, int threads,
               const RunnerHooks& hooks) {
  // One draw context per (scenario, draw), built by whichever thread needs it first.
  struct Slot {
    std::once_flag once;
    DrawContext context;
  };
  std::map<std::pair<int, int>, std::unique_ptr<Slot>> slots;
  for (std::size_t i : todo) {
    auto& p = slots[{units[i].scenario, units[i].draw}];
    if (!p) p = std::make_unique<Slot>();
  }
  std::atomic<std::size_t> next{0};
  std::mutex deliver;
  std::exception_ptr failure;
  auto work = [&] {
    try {
      while (true) {
        if (hooks.stop_requested && hooks.stop_requested()) return;
        {
          std::lock_guard lock(deliver);
          if (failure) return;
        }
        const std::size_t k = next.fetch_add(1);
        if (k >= todo.size()) return;
        const UnitId& u = units[todo[k]];
        Slot& slot = *slots.at({u.scenario, u.draw});
        std::call_once(slot.once, [&] { slot.context = make_draw_context(study, u.scenario, u.draw); });
        auto rows = run_unit(study, u, slot.context);
        std::lock_guard lock(deliver);
        if (hooks.on_unit) hooks.on_unit(todo[k], std::move(rows));
      }
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
