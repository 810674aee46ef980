// Benchmark (not a test): one EM iteration (E-step over the logged episodes, then the M-step) of
// the regime-aware fit. Default: the reference size of issue 2, 2000 logged episodes, horizon 20,
// 8 latent values, 3 actions, 6 observations.
// Usage: bench_em [repeats [episodes [latent [actions [observations [horizon]]]]]]
// Prints the median and minimum milliseconds per iteration over the repeats, as wall time and as
// this thread's CPU time (steadier on a shared machine).
#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <ctime>
#include <vector>

#include "core/world/dataset.hpp"
#include "core/fitting/forward_backward.hpp"
#include "core/world/synthetic.hpp"

namespace {
double thread_cpu_ms() {
  timespec ts{};
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
  return static_cast<double>(ts.tv_sec) * 1e3 + static_cast<double>(ts.tv_nsec) * 1e-6;
}
}  // namespace

int main(int argc, char** argv) {
  using namespace dobudget;
  auto arg = [&](int i, int fallback) { return argc > i ? std::atoi(argv[i]) : fallback; };
  const int repeats = std::max(1, arg(1, 30));
  const int n = arg(2, 2000), Z = arg(3, 8), A = arg(4, 3), O = arg(5, 6), H = arg(6, 20);
  ScenarioSettings s;
  s.environment.family = {Z, A, O, 0.5, 0.3};
  s.environment.horizon = H;
  const Environment env = make_environment(s, StreamKey{1, 0, 0, 0});
  Engine rng(7);
  const Dataset logged = simulate(env, Regime::logged, n, rng);
  Pomdp m = env.model;  // any valid model of this size as the starting point
  Matrix qA = env.logging_policy;
  ForwardBackward fb(Z, A, O, H);
  ExpectedCounts counts;
  std::vector<double> wall, cpu;
  for (int r = 0; r < repeats; ++r) {
    const auto t0 = std::chrono::steady_clock::now();
    const double c0 = thread_cpu_ms();
    counts.reset(Z, A, O);
    fb.load(m, &qA);
    fb.accumulate({&logged, logged.count, Regime::logged}, counts);
    maximise(counts, 0.1, m, &qA);
    cpu.push_back(thread_cpu_ms() - c0);
    wall.push_back(std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - t0).count());
  }
  std::sort(wall.begin(), wall.end());
  std::sort(cpu.begin(), cpu.end());
  std::printf("regime-aware EM iteration, %d logged episodes, H=%d, Z=%d, A=%d, O=%d: median %.3f ms, min %.3f ms "
              "(wall); cpu median %.3f ms, min %.3f ms over %d\n",
              n, H, Z, A, O, wall[wall.size() / 2], wall.front(), cpu[cpu.size() / 2], cpu.front(), repeats);
  return 0;
}
