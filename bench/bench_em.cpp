// Benchmark (not a test): one EM iteration of the regime-aware fit at the reference size of
// issue 2: 2000 logged episodes, horizon 20, 8 latent values, 3 actions, 6 observations.
// Usage: bench_em [iterations]   Prints the median milliseconds per iteration over repeats.
#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <vector>

#include "core/world/dataset.hpp"
#include "core/fitting/forward_backward.hpp"
#include "core/world/synthetic.hpp"

int main(int argc, char** argv) {
  using namespace dobudget;
  const int repeats = argc > 1 ? std::atoi(argv[1]) : 30;
  ScenarioSettings s;
  s.environment.family = {8, 3, 6, 0.5, 0.3};
  s.environment.horizon = 20;
  const Environment env = make_environment(s, StreamKey{1, 0, 0, 0});
  Engine rng(7);
  const Dataset logged = simulate(env, Regime::logged, 2000, rng);
  const Dataset pilot = simulate(env, Regime::pilot, 100, rng);
  Pomdp m = env.model;  // any valid 8-state model as the starting point
  Matrix qA = env.logging_policy;
  ForwardBackward fb(8, 3, 6, 20);
  ExpectedCounts counts;
  std::vector<double> ms;
  for (int r = 0; r < repeats; ++r) {
    const auto t0 = std::chrono::steady_clock::now();
    counts.reset(8, 3, 6);
    fb.load(m, &qA);
    fb.accumulate({&logged, logged.count, Regime::logged}, counts);
    maximise(counts, 0.1, m, &qA);
    ms.push_back(std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - t0).count());
  }
  std::sort(ms.begin(), ms.end());
  std::printf("regime-aware EM iteration, 2000 logged episodes, H=20, Z=8, A=3, O=6: median %.3f ms, min %.3f ms over %d\n",
              ms[ms.size() / 2], ms.front(), repeats);
  return 0;
}
