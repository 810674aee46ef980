// Measurement (not a test), issue 11 item 3: does starting a fit at a pilot budget from the same
// strategy's fit at the next smaller budget (nested data: fit_start.hpp, run_unit) reach the same
// or a better objective in fewer E-steps than without that warm start? Default-study sizes
// (4 latent values, 2 actions, 2 observations, horizon 8, concentration 0.1, noise 0.1, privilege 1,
// temperature 0.05), pilot budgets 10, 30, 100, 300 and 1000 logged episodes; the other warm starts
// of run_unit (pilot-only of the same budget, pooled for regime-aware) are offered in both arms, and
// both arms draw their random starts from the same stream.
// Usage: bench_warm [draws [replicates]]
#include <cstdio>
#include <cstdlib>
#include <vector>

#include "core/fitting/fit.hpp"
#include "core/world/dataset.hpp"
#include "core/world/synthetic.hpp"

int main(int argc, char** argv) {
  using namespace dobudget;
  const int draws = argc > 1 ? std::atoi(argv[1]) : 4, reps = argc > 2 ? std::atoi(argv[2]) : 3;
  ScenarioSettings s;
  s.environment.family = {4, 2, 2, 0.1, 0.1};
  s.environment.horizon = 8;
  s.logging.privilege = 1.0;
  s.logging.temperature = 0.05;
  const int budgets[] = {10, 30, 100, 300};
  long long it_with = 0, it_without = 0, kept_with = 0, kept_without = 0;
  int fits = 0, better = 0, worse = 0;
  double obj_diff = 0.0;
  for (int d = 0; d < draws; ++d)
    for (int r = 0; r < reps; ++r) {
      const Environment env = make_environment(s, StreamKey{1, 0, static_cast<std::uint64_t>(d), 0});
      Engine data_rng(1000 + 17 * d + r);
      const Dataset pilot = simulate(env, Regime::pilot, 300, data_rng);
      const Dataset logged = simulate(env, Regime::logged, 1000, data_rng);
      for (int arm = 0; arm < 2; ++arm) {
        const bool previous = arm == 0;
        std::vector<FitResult> po, pooled, ra;
        for (int bi = 0; bi < 4; ++bi) {
          const int n = budgets[bi];
          const std::vector<DataView> vpo{{&pilot, n, Regime::pilot}};
          const std::vector<DataView> vpool{{&pilot, n, Regime::pilot}, {&logged, 1000, Regime::pilot}};
          const std::vector<DataView> vra{{&pilot, n, Regime::pilot}, {&logged, 1000, Regime::logged}};
          auto run = [&](const std::vector<DataView>& v, bool rule, std::vector<WarmStart> warm,
                         std::vector<FitResult>& done, int salt) {
            if (previous && bi > 0) warm.push_back({&done.back().model, &done.back().decision});
            Engine rng(77 + 1000003ull * static_cast<unsigned long long>(salt) + 7919ull * n + 31ull * d + r);
            done.push_back(fit(v, rule, s.fit, env.model, rng, warm));
          };
          run(vpo, false, {}, po, 1);
          run(vpool, false, {{&po.back().model, nullptr}}, pooled, 2);
          run(vra, true, {{&po.back().model, nullptr}, {&pooled.back().model, nullptr}}, ra, 3);
        }
        for (auto* list : {&po, &pooled, &ra})
          for (std::size_t i = 1; i < list->size(); ++i) {  // budgets after the smallest
            const FitResult& f = (*list)[i];
            (previous ? it_with : it_without) += f.total_iterations;
            (previous ? kept_with : kept_without) += f.iterations;
          }
        static std::vector<double> with_objs;
        if (previous) {
          with_objs.clear();
          for (auto* list : {&po, &pooled, &ra})
            for (std::size_t i = 1; i < list->size(); ++i) with_objs.push_back((*list)[i].objective);
        } else {
          std::size_t j = 0;
          for (auto* list : {&po, &pooled, &ra})
            for (std::size_t i = 1; i < list->size(); ++i, ++j) {
              const double diff = with_objs[j] - (*list)[i].objective;
              obj_diff += diff;
              ++fits;
              if (diff > 1e-3) ++better;
              if (diff < -1e-3) ++worse;
            }
        }
      }
    }
  std::printf("fits compared (budgets 30, 100, 300; 3 strategies): %d\n", fits);
  std::printf("E-steps of all starts per fit: with previous-budget start %.1f, without %.1f\n",
              static_cast<double>(it_with) / fits, static_cast<double>(it_without) / fits);
  std::printf("E-steps of the kept start per fit: with %.1f, without %.1f\n", static_cast<double>(kept_with) / fits,
              static_cast<double>(kept_without) / fits);
  std::printf("objective with - without: mean %.4f nats; with higher by > 1e-3 in %d fits, lower in %d\n",
              obj_diff / fits, better, worse);
  return 0;
}
