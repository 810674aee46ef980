// Benchmark (not a test): one EM iteration (E-step over the logged episodes, then the M-step) of
// the regime-aware fit with each compiled build of the forward-backward kernel this CPU supports
// (forward_backward.hpp: the parameters of each lane's action and observation are selected by a
// table permute, with AVX-512 up to 8 entries and with AVX2 up to 4, otherwise by a chain of
// selections), alternating between the builds so that a shared machine's drift falls on all of them.
// Default: the reference size, 2000 logged episodes, horizon 20, 8 latent values, 3 actions,
// 6 observations. Every build must give the same log-likelihood bits; this is checked too.
// Usage: bench_kernel_builds [repeats [episodes [latent [actions [observations [horizon]]]]]]
// Prints per build the median and minimum of this thread's CPU milliseconds per iteration.
// (The set-up repeats bench_em.cpp's on purpose: bench/compare.sh builds bench_em.cpp alone against
// older commits, so it includes nothing of bench/.)
#include <algorithm>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <ctime>
#include <vector>

#include "core/fitting/forward_backward.hpp"
#include "core/world/dataset.hpp"
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
  std::vector<KernelPath> paths;
  for (KernelPath p : {KernelPath::baseline, KernelPath::avx2, KernelPath::avx512})
    if (kernel_path_supported(p)) paths.push_back(p);
  struct Arm {
    ForwardBackward fb;
    Pomdp model;
    Matrix decision;
    std::vector<double> cpu;
    double first_ll = 0.0;
  };
  std::vector<Arm> arms;
  for (KernelPath p : paths) {
    arms.push_back({ForwardBackward(Z, A, O, H), env.model, env.logging_policy, {}, 0.0});
    arms.back().fb.set_kernel_path(p);
  }
  for (int r = 0; r < repeats; ++r)
    for (Arm& arm : arms) {
      ExpectedCounts counts;
      const double c0 = thread_cpu_ms();
      counts.reset(Z, A, O);
      arm.fb.load(arm.model, &arm.decision);
      const double ll = arm.fb.accumulate({&logged, logged.count, Regime::logged}, counts);
      maximise(counts, 0.1, arm.model, &arm.decision);
      arm.cpu.push_back(thread_cpu_ms() - c0);
      if (r == 0) arm.first_ll = ll;
    }
  int status = 0;
  for (Arm& arm : arms) {
    std::sort(arm.cpu.begin(), arm.cpu.end());
    const bool same = std::memcmp(&arm.first_ll, &arms.front().first_ll, sizeof(double)) == 0;
    std::printf("%-8s EM iteration, %d logged episodes, H=%d, Z=%d, A=%d, O=%d: cpu median %.3f ms, min %.3f ms over %d%s\n",
                kernel_path_name(arm.fb.kernel_path()), n, H, Z, A, O, arm.cpu[arm.cpu.size() / 2], arm.cpu.front(),
                repeats, same ? "" : "  (log-likelihood bits differ from the baseline!)");
    if (!same) status = 1;
  }
  return status;
}
