// Benchmark (not a test): GHMM's Baum-Welch step (libghmm, as packaged by Debian) on a plain
// discrete HMM of the reference size, the outside yardstick for bench_em: 2000 sequences of 21
// observations (horizon 20), 8 states, 6 symbols, one action (no decision rule, so less work than
// dobudget's regime-aware step). Each repeat re-creates the model from the same parameters and
// runs ghmm_dmodel_baum_welch_nstep(max_step = 1), which is one E-step and one re-estimation.
// Usage: bench_ghmm [repeats [sequences [states [symbols [horizon]]]]]
#include <ghmm/ghmm.h>
#include <ghmm/model.h>
#include <ghmm/reestimate.h>
#include <ghmm/sequence.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <ctime>
#include <vector>

#include "core/world/dataset.hpp"
#include "core/world/synthetic.hpp"

namespace {
double thread_cpu_ms() {
  timespec ts{};
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
  return static_cast<double>(ts.tv_sec) * 1e3 + static_cast<double>(ts.tv_nsec) * 1e-6;
}
void quiet(int, const char*, void*) {}

ghmm_dmodel* make_model(const dobudget::Pomdp& m) {
  const int N = m.states, M = m.observations;
  std::vector<int> degree(static_cast<std::size_t>(N), N);
  ghmm_dmodel* mo = ghmm_dmodel_calloc(M, N, GHMM_kDiscreteHMM, degree.data(), degree.data());
  mo->prior = -1;
  const dobudget::Matrix& T = m.transitions[0];
  for (int i = 0; i < N; ++i) {
    ghmm_dstate& s = mo->s[i];
    s.pi = m.initial(i);
    s.fix = 0;
    s.out_states = N;
    s.in_states = N;
    for (int j = 0; j < N; ++j) {
      s.out_id[j] = j;
      s.out_a[j] = T(i, j);
      s.in_id[j] = j;
      s.in_a[j] = T(j, i);
    }
    for (int o = 0; o < M; ++o) s.b[o] = m.emissions(i, o);
  }
  return mo;
}
}  // namespace

int main(int argc, char** argv) {
  using namespace dobudget;
  auto arg = [&](int i, int fallback) { return argc > i ? std::atoi(argv[i]) : fallback; };
  const int repeats = std::max(1, arg(1, 30));
  const int n = arg(2, 2000), Z = arg(3, 8), O = arg(4, 6), H = arg(5, 20);
  ghmm_set_logfunc(&quiet, nullptr);
  ScenarioSettings s;
  s.environment.family = {Z, 1, O, 0.5, 0.3};
  s.environment.horizon = H;
  const Environment env = make_environment(s, StreamKey{1, 0, 0, 0});
  Engine rng(7);
  const Dataset d = simulate(env, Regime::pilot, n, rng);
  ghmm_dseq* sq = ghmm_dseq_calloc(n);
  for (int i = 0; i < n; ++i) {
    sq->seq[i] = static_cast<int*>(std::malloc(sizeof(int) * static_cast<std::size_t>(H + 1)));
    for (int t = 0; t <= H; ++t) sq->seq[i][t] = d.obs(i)[t];
    sq->seq_len[i] = H + 1;
    sq->seq_w[i] = 1.0;
  }
  sq->seq_number = n;
  sq->total_w = n;
  std::vector<double> wall, cpu;
  for (int r = 0; r < repeats; ++r) {
    ghmm_dmodel* mo = make_model(env.model);
    const auto t0 = std::chrono::steady_clock::now();
    const double c0 = thread_cpu_ms();
    ghmm_dmodel_baum_welch_nstep(mo, sq, 1, 0.0);
    cpu.push_back(thread_cpu_ms() - c0);
    wall.push_back(std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - t0).count());
    ghmm_dmodel_free(&mo);
  }
  ghmm_dseq_free(&sq);
  std::sort(wall.begin(), wall.end());
  std::sort(cpu.begin(), cpu.end());
  std::printf("GHMM Baum-Welch step, %d sequences, H=%d, Z=%d, O=%d: median %.3f ms, min %.3f ms (wall); "
              "cpu median %.3f ms, min %.3f ms over %d\n",
              n, H, Z, O, wall[wall.size() / 2], wall.front(), cpu[cpu.size() / 2], cpu.front(), repeats);
  return 0;
}
