// Reference tests of the scaled forward-backward of the input-output HMM (src/core/fitting/forward_backward.hpp)
// and of one EM step (src/core/fitting/fit.hpp), against
//   * GHMM (libghmm, 0.9~rc3 as packaged by Debian), an independent implementation of the scaled
//     forward algorithm and of Baum-Welch re-estimation for plain discrete HMMs
//     (Rabiner, "A tutorial on hidden Markov models...", Proc. IEEE 77(2), 1989, sec. V.A and eqs. 40a-c);
//   * brute-force summation over every latent path, written here independently of the code under test;
//   * hand-computed values for the occasionally dishonest casino.
// Mapping to GHMM: a dobudget episode o_0..o_H with H actions (one action only) is a GHMM sequence of
// length H+1; our T[0] is GHMM's transition matrix (out_a/in_a), our initial its pi, our E its b.
#include <catch2/catch.hpp>

#include <boost/random/uniform_01.hpp>
#include <boost/random/uniform_int_distribution.hpp>
#include <cmath>
#include <cstdlib>
#include <cstring>
#include <limits>
#include <string>
#include <vector>

#include "../same_bits.hpp"
#include "core/world/dataset.hpp"
#include "core/fitting/fit.hpp"
#include "core/fitting/forward_backward.hpp"
#include "core/world/logging_policy.hpp"
#include "core/world/pomdp.hpp"
#include "core/world/seeding.hpp"
#include "core/world/synthetic.hpp"

#ifdef DOBUDGET_HAVE_GHMM
#include <ghmm/ghmm.h>
#include <ghmm/foba.h>
#include <ghmm/model.h>
#include <ghmm/reestimate.h>
#include <ghmm/sequence.h>
#endif

using namespace dobudget;
using dobudget::test::same_bits;

namespace {

// ---------------------------------------------------------------------------------------------
// Fixtures (generated with Boost.Random directly, not with the samplers under test).

// A row-stochastic row with entries floor + U(0,1), normalised: every entry is positive, so every
// sequence has positive probability and GHMM's "state unreachable" branches are never taken.
template <typename Row>
void fb_random_row(Engine& rng, Row&& row, double floor = 0.05) {
  boost::random::uniform_01<double> U;
  double s = 0.0;
  for (Eigen::Index j = 0; j < row.size(); ++j) s += (row(j) = floor + U(rng));
  for (Eigen::Index j = 0; j < row.size(); ++j) row(j) /= s;
}

Pomdp fb_random_model(int Z, int A, int O, int H, Engine& rng) {
  Pomdp m;
  m.states = Z;
  m.actions = A;
  m.observations = O;
  m.horizon = H;
  m.initial.resize(Z);
  fb_random_row(rng, m.initial);
  m.transitions.assign(static_cast<std::size_t>(A), Matrix(Z, Z));
  for (auto& T : m.transitions)
    for (int z = 0; z < Z; ++z) fb_random_row(rng, T.row(z));
  m.emissions.resize(Z, O);
  for (int z = 0; z < Z; ++z) fb_random_row(rng, m.emissions.row(z));
  m.rewards = Vector::Zero(O);
  return m;
}

Matrix fb_random_decision(int Z, int A, Engine& rng) {
  Matrix D(Z, A);
  for (int z = 0; z < Z; ++z) fb_random_row(rng, D.row(z));
  return D;
}

// n episodes of horizon H with uniformly random observations and actions.
Dataset fb_random_dataset(int n, int H, int A, int O, Engine& rng) {
  boost::random::uniform_int_distribution<int> uo(0, O - 1), ua(0, A - 1);
  Dataset d;
  d.horizon = H;
  d.count = n;
  d.observations.resize(static_cast<std::size_t>(n) * (H + 1));
  d.actions.resize(static_cast<std::size_t>(n) * H);
  for (auto& o : d.observations) o = uo(rng);
  for (auto& a : d.actions) a = ua(rng);
  return d;
}

// One episode as a dataset of count 1.
Dataset fb_single(const std::vector<int>& obs, const std::vector<int>& act) {
  Dataset d;
  d.horizon = static_cast<int>(act.size());
  d.count = 1;
  d.observations.assign(obs.begin(), obs.end());
  d.actions.assign(act.begin(), act.end());
  return d;
}

// ---------------------------------------------------------------------------------------------
// Brute force over every latent path z_0..z_H (docs/design.md, "The latent model", written out term by term).

// Joint probability of a path and the episode: q0(z0) qE(z0,o0) prod_t qT[a_t](z_t,z_{t+1}) qE(z_{t+1},o_{t+1}),
// times prod_{t<H} qA(z_t, a_t) when `decision` is given.
double fb_path_joint(const Pomdp& m, const Matrix* decision, const std::int32_t* o, const std::int32_t* a, int H,
                     const std::vector<int>& z) {
  double p = m.initial(z[0]) * m.emissions(z[0], o[0]);
  for (int t = 0; t < H; ++t) {
    if (decision) p *= (*decision)(z[t], a[t]);
    p *= m.transitions[static_cast<std::size_t>(a[t])](z[t], z[t + 1]) * m.emissions(z[t + 1], o[t + 1]);
  }
  return p;
}

// Calls f(z) for every path z in {0..Z-1}^(H+1).
template <typename F>
void fb_for_each_path(int Z, int H, F&& f) {
  std::vector<int> z(static_cast<std::size_t>(H + 1), 0);
  while (true) {
    f(z);
    int k = 0;
    while (k <= H && ++z[static_cast<std::size_t>(k)] == Z) z[static_cast<std::size_t>(k++)] = 0;
    if (k > H) break;
  }
}

double fb_brute_likelihood(const Pomdp& m, const Matrix* decision, const std::int32_t* o, const std::int32_t* a,
                           int H) {
  double p = 0.0;
  fb_for_each_path(m.states, H, [&](const std::vector<int>& z) { p += fb_path_joint(m, decision, o, a, H, z); });
  return p;
}

double fb_brute_loglik(const Pomdp& m, const Matrix* decision, const Dataset& d) {
  double ll = 0.0;
  for (int i = 0; i < d.count; ++i) ll += std::log(fb_brute_likelihood(m, decision, d.obs(i), d.act(i), d.length(i)));
  return ll;
}

// Posterior expected counts by brute force: weight every path by p(path | episode).
ExpectedCounts fb_brute_counts(const Pomdp& m, const Matrix* decision, const Dataset& d) {
  ExpectedCounts c;
  c.initial = Vector::Zero(m.states);
  c.transitions.assign(static_cast<std::size_t>(m.actions), Matrix::Zero(m.states, m.states));
  c.emissions = Matrix::Zero(m.states, m.observations);
  c.decision = Matrix::Zero(m.states, m.actions);
  for (int i = 0; i < d.count; ++i) {
    const auto* o = d.obs(i);
    const auto* a = d.act(i);
    const int H = d.length(i);
    const double p = fb_brute_likelihood(m, decision, o, a, H);
    c.loglik += std::log(p);
    fb_for_each_path(m.states, H, [&](const std::vector<int>& z) {
      const double w = fb_path_joint(m, decision, o, a, H, z) / p;
      c.initial(z[0]) += w;
      for (int t = 0; t <= H; ++t) c.emissions(z[static_cast<std::size_t>(t)], o[t]) += w;
      for (int t = 0; t < H; ++t) {
        c.transitions[static_cast<std::size_t>(a[t])](z[static_cast<std::size_t>(t)], z[static_cast<std::size_t>(t + 1)]) += w;
        if (decision) c.decision(z[static_cast<std::size_t>(t)], a[t]) += w;
      }
    });
  }
  return c;
}

double fb_max_abs_diff(const Matrix& x, const Matrix& y) { return (x - y).cwiseAbs().maxCoeff(); }

#ifdef DOBUDGET_HAVE_GHMM
// ---------------------------------------------------------------------------------------------
// GHMM adaptor. GHMM's messages (e.g. "-log_p" traces) are collected instead of printed.

std::vector<std::string>& fb_ghmm_messages() {
  static std::vector<std::string> log;
  return log;
}

void fb_ghmm_logger(int level, const char* message, void*) {
  fb_ghmm_messages().push_back(std::to_string(level) + ": " + (message ? message : ""));
}

struct GhmmModel {
  ghmm_dmodel* mo = nullptr;

  // Fully connected discrete HMM with pi = m.initial, a = m.transitions[0], b = m.emissions.
  explicit GhmmModel(const Pomdp& m) {
    ghmm_set_logfunc(&fb_ghmm_logger, nullptr);
    const int N = m.states, M = m.observations;
    std::vector<int> degree(static_cast<std::size_t>(N), N);
    mo = ghmm_dmodel_calloc(M, N, GHMM_kDiscreteHMM, degree.data(), degree.data());
    REQUIRE(mo != nullptr);
    mo->prior = -1;
    const Matrix& T = m.transitions[0];
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
    REQUIRE(ghmm_dmodel_check(mo) == 0);
  }
  ~GhmmModel() { ghmm_dmodel_free(&mo); }
  GhmmModel(const GhmmModel&) = delete;
  GhmmModel& operator=(const GhmmModel&) = delete;

  double pi(int i) const { return mo->s[i].pi; }
  double b(int i, int o) const { return mo->s[i].b[o]; }
  // a(i, j): looked up through out_id, whatever order GHMM keeps.
  double a(int i, int j) const {
    for (int k = 0; k < mo->s[i].out_states; ++k)
      if (mo->s[i].out_id[k] == j) return mo->s[i].out_a[k];
    return 0.0;
  }
};

// All episodes of all datasets as one GHMM sequence set (each of length H+1, weight 1).
struct GhmmSequences {
  ghmm_dseq* sq = nullptr;
  explicit GhmmSequences(const std::vector<const Dataset*>& sets) {
    long n = 0;
    for (const auto* d : sets) n += d->count;
    sq = ghmm_dseq_calloc(n);
    REQUIRE(sq != nullptr);
    long k = 0;
    for (const auto* d : sets)
      for (int i = 0; i < d->count; ++i, ++k) {
        const int len = d->horizon + 1;
        sq->seq[k] = static_cast<int*>(std::malloc(sizeof(int) * static_cast<std::size_t>(len)));
        for (int t = 0; t < len; ++t) sq->seq[k][t] = d->obs(i)[t];
        sq->seq_len[k] = len;
        sq->seq_w[k] = 1.0;
      }
    sq->seq_number = n;
    sq->total_w = static_cast<double>(n);
  }
  ~GhmmSequences() { ghmm_dseq_free(&sq); }
  GhmmSequences(const GhmmSequences&) = delete;
  GhmmSequences& operator=(const GhmmSequences&) = delete;
};

double ghmm_total_logp(GhmmModel& g, const GhmmSequences& s) {
  double total = 0.0;
  for (long k = 0; k < s.sq->seq_number; ++k) {
    double lp = 0.0;
    REQUIRE(ghmm_dmodel_logp(g.mo, s.sq->seq[k], s.sq->seq_len[k], &lp) == 0);
    REQUIRE(lp != 1.0);  // GHMM's code for "sequence cannot be generated"
    total += lp;
  }
  return total;
}
#endif

// The occasionally dishonest casino (Durbin, Eddy, Krogh and Mitchison, Biological Sequence Analysis,
// 1998, ch. 3, sec. 3.2; parameters from memory): state 0 = fair die (1..6 each 1/6), state 1 = loaded
// die (6 with 1/2, 1..5 with 1/10 each); fair->loaded 0.05, loaded->fair 0.1. Start probabilities are
// our choice: (1/2, 1/2). Die face f is observation f-1.
Pomdp fb_casino(int H) {
  Pomdp m;
  m.states = 2;
  m.actions = 1;
  m.observations = 6;
  m.horizon = H;
  m.initial = Vector::Constant(2, 0.5);
  Matrix T(2, 2);
  T << 0.95, 0.05, 0.10, 0.90;
  m.transitions = {T};
  m.emissions.resize(2, 6);
  m.emissions.row(0).setConstant(1.0 / 6.0);
  m.emissions.row(1).setConstant(0.1);
  m.emissions(1, 5) = 0.5;
  m.rewards = Vector::Zero(6);
  return m;
}

}  // namespace

// =============================================================================================
// 1a. Forward log-likelihood against GHMM and against hand computation.

TEST_CASE("forward-backward: casino log-likelihood equals hand-computed values", "[forward_backward]") {
  // Hand computation (sum over the 2 or 4 latent paths), casino parameters from memory (Durbin et al. 1998, ch. 3):
  //   p(6)    = 1/2 * 1/6 + 1/2 * 1/2                                  = 1/3
  //   p(6, 6) = .5*(1/6)*.95*(1/6) + .5*(1/6)*.05*.5 + .5*.5*.1*(1/6) + .5*.5*.9*.5
  //           = .95/72 + .025/12 + .025/6 + .1125                      = 19/144
  //   p(1, 6) = .5*(1/6)*.95*(1/6) + .5*(1/6)*.05*.5 + .5*.1*.1*(1/6) + .5*.1*.9*.5
  //           = (9.5 + 1.5 + 0.6 + 16.2)/720                           = 139/3600
  const Pomdp m0 = fb_casino(0);
  const Dataset one = fb_single({5}, {});
  CHECK(log_likelihood({{&one, 1, Regime::pilot}}, m0, Matrix()) == Approx(std::log(1.0 / 3.0)).epsilon(1e-14));
  const Pomdp m1 = fb_casino(1);
  const Dataset two = fb_single({5, 5}, {0});
  CHECK(log_likelihood({{&two, 1, Regime::pilot}}, m1, Matrix()) == Approx(std::log(19.0 / 144.0)).epsilon(1e-14));
  const Dataset three = fb_single({0, 5}, {0});
  CHECK(log_likelihood({{&three, 1, Regime::pilot}}, m1, Matrix()) == Approx(std::log(139.0 / 3600.0)).epsilon(1e-14));
}

#ifdef DOBUDGET_HAVE_GHMM
TEST_CASE("forward-backward: log-likelihood of plain HMMs equals GHMM's scaled forward", "[forward_backward]") {
  // Reference: GHMM ghmm_dmodel_logp (scaled forward, Rabiner 1989 sec. V.A). Tolerance: relative 1e-11
  // (*common practice*: both sum H+1 logarithms of O(1) scale factors, each with ~1 ulp error).
  struct Case {
    int Z, O, H, n;
  };
  const Case cases[] = {{2, 2, 1, 7}, {3, 4, 5, 6}, {4, 3, 20, 5}, {5, 6, 200, 3}, {3, 4, 1000, 2}};
  Engine rng(20240611);
  for (const Case& c : cases) {
    INFO("Z=" << c.Z << " O=" << c.O << " H=" << c.H);
    const Pomdp m = fb_random_model(c.Z, 1, c.O, c.H, rng);
    const Dataset d = fb_random_dataset(c.n, c.H, 1, c.O, rng);
    const double ours = log_likelihood({{&d, d.count, Regime::pilot}}, m, Matrix());
    GhmmModel g(m);
    GhmmSequences s({&d});
    const double ref = ghmm_total_logp(g, s);
    CHECK(std::abs(ours - ref) <= 1e-11 * std::abs(ref));
    // The same through the ForwardBackward workspace directly.
    ForwardBackward fb(c.Z, 1, c.O, c.H);
    fb.load(m, nullptr);
    CHECK(std::abs(fb.log_likelihood({&d, d.count, Regime::pilot}) - ref) <= 1e-11 * std::abs(ref));
    if (c.H >= 1000) {
      // Per sequence the probability is below the smallest double (exp(-745)): an unscaled forward
      // pass would underflow to 0 (*common practice*, Rabiner 1989 sec. V.A), the scaled one must not.
      CHECK(std::exp(ref / c.n) == 0.0);
      CHECK(std::isfinite(ours));
    }
  }
}

TEST_CASE("forward-backward: casino log-likelihood equals GHMM on long sequences", "[forward_backward]") {
  // Casino of Durbin et al. 1998, ch. 3 (parameters from memory, start (1/2, 1/2) chosen here);
  // sequences of 201 and 1001 rolls drawn from the casino itself. Reference: GHMM ghmm_dmodel_logp.
  for (int H : {200, 1000}) {
    INFO("H=" << H);
    Environment env;
    env.model = fb_casino(H);
    env.logging_policy = Matrix::Ones(2, 1);
    Engine rng(7 + H);
    const Dataset d = simulate(env, Regime::pilot, 4, rng);
    const double ours = log_likelihood({{&d, d.count, Regime::pilot}}, env.model, Matrix());
    GhmmModel g(env.model);
    GhmmSequences s({&d});
    const double ref = ghmm_total_logp(g, s);
    CHECK(std::abs(ours - ref) <= 1e-11 * std::abs(ref));
    CHECK(ref < -4.0 * H * 1.0);  // sanity: a 6-sided die costs more than 1 nat per roll
  }
}

// =============================================================================================
// 1b. One Baum-Welch step against GHMM.
//
// GHMM's ghmm_dmodel_baum_welch_nstep(mo, sq, max_step = 1, likelihood_delta = 0) runs exactly one
// reestimate_one_step: an E-step on the current model followed by reestimate_setlambda, which sets
//   pi_i  = sum_k w_k gamma^k_0(i) / sum_k w_k sum_i gamma^k_0(i)                 (pi IS re-estimated)
//   a_ij  = sum_k w_k sum_{t<T_k-1} xi^k_t(i,j) / sum_k w_k sum_{t<T_k-1} gamma^k_t(i)
//   b_i(m)= sum_k w_k sum_{t: O_t=m} gamma^k_t(i) / sum_k w_k sum_t gamma^k_t(i)
// (GHMM reestimate.c, reestimate_one_step / reestimate_setlambda; Rabiner 1989 eqs. 40a-c and 109-110
// for several sequences). With every weight w_k = 1 this is the maximum-likelihood EM update, i.e.
// dobudget's em_step with prior = 0. The loop's first convergence test compares with -DBL_MAX, so
// with max_step = 1 exactly one update is made; GHMM skips emission rows whose denominator is below
// 1e-8 (never the case here: every state has posterior mass of order 1).

TEST_CASE("forward-backward: one Baum-Welch step equals GHMM's re-estimation", "[forward_backward]") {
  struct Case {
    int Z, O, H1, n1, H2, n2;
  };
  // Two datasets per case so that GHMM sees sequences of two different lengths.
  // Latent sizes 1..8 (the E-step may specialise on small sizes; every branch is compared), and 10
  // and 12 (the general kernel); episode counts that fill 8 lanes partly (1, 3, 5, 9, 11, 17, ...).
  const Case cases[] = {{2, 2, 3, 20, 7, 5},  {3, 4, 10, 15, 1, 30}, {4, 3, 25, 8, 60, 2}, {2, 5, 100, 3, 4, 10},
                        {1, 3, 4, 5, 2, 5},   {5, 4, 6, 10, 12, 4},  {6, 3, 8, 6, 3, 6},   {7, 5, 5, 8, 9, 3},
                        {8, 4, 10, 6, 2, 5},  {10, 3, 6, 9, 4, 11}, {12, 5, 3, 17, 8, 1}};
  Engine rng(99);
  for (const Case& c : cases) {
    INFO("Z=" << c.Z << " O=" << c.O);
    Pomdp m = fb_random_model(c.Z, 1, c.O, std::max(c.H1, c.H2), rng);
    const Dataset d1 = fb_random_dataset(c.n1, c.H1, 1, c.O, rng);
    const Dataset d2 = fb_random_dataset(c.n2, c.H2, 1, c.O, rng);
    const std::vector<DataView> views{{&d1, d1.count, Regime::pilot}, {&d2, d2.count, Regime::pilot}};

    GhmmModel g(m);
    GhmmSequences s({&d1, &d2});
    const double ref_before = ghmm_total_logp(g, s);
    fb_ghmm_messages().clear();
    const int rc = ghmm_dmodel_baum_welch_nstep(g.mo, s.sq, 1, 0.0);
    {
      std::string log;
      for (const auto& msg : fb_ghmm_messages()) log += msg + "\n";
      INFO("GHMM said:\n" << log);
      CHECK(rc >= 0);
    }

    Matrix none;
    const double ours_before = em_step(views, 0.0, m, none);
    CHECK(std::abs(ours_before - ref_before) <= 1e-11 * std::abs(ref_before));
    for (int i = 0; i < c.Z; ++i) {
      CHECK(std::abs(m.initial(i) - g.pi(i)) <= 1e-9);
      for (int j = 0; j < c.Z; ++j) CHECK(std::abs(m.transitions[0](i, j) - g.a(i, j)) <= 1e-9);
      for (int o = 0; o < c.O; ++o) CHECK(std::abs(m.emissions(i, o) - g.b(i, o)) <= 1e-9);
    }
    // And the log-likelihood after the step, each under its own re-estimated model.
    const double ref_after = ghmm_total_logp(g, s);
    CHECK(std::abs(log_likelihood(views, m, Matrix()) - ref_after) <= 1e-9 * std::abs(ref_after));
    CHECK(ref_after >= ref_before);  // Baum-Welch never decreases the likelihood (Baum et al. 1970)
  }
}
#endif

// =============================================================================================
// 1c. Both regimes against brute-force summation over latent paths.

TEST_CASE("forward-backward: log-likelihood of both regimes equals brute force over latent paths",
          "[forward_backward]") {
  // Reference: direct summation over all Z^(H+1) latent paths of the episode likelihoods of
  // docs/design.md, "The latent model" (pilot: q0 qE prod qT qE; logged with a decision rule: also prod_{t<H} qA(z_t, a_t)).
  Engine rng(31337);
  int checked = 0;
  for (int Z : {2, 3})
    for (int O : {2, 3})
      for (int H = 1; H <= 4; ++H) {
        INFO("Z=" << Z << " O=" << O << " H=" << H);
        const int A = 2;
        const Pomdp m = fb_random_model(Z, A, O, H, rng);
        const Matrix D = fb_random_decision(Z, A, rng);
        const Dataset d = fb_random_dataset(4, H, A, O, rng);
        const double pilot_ref = fb_brute_loglik(m, nullptr, d);
        const double logged_ref = fb_brute_loglik(m, &D, d);
        REQUIRE(std::abs(pilot_ref - logged_ref) > 1e-3);  // the decision rule matters in this case
        // Pilot view: no decision rule even when one is loaded.
        CHECK(log_likelihood({{&d, d.count, Regime::pilot}}, m, D) == Approx(pilot_ref).epsilon(1e-12));
        // Logged view with a decision rule: multiplies qA.
        CHECK(log_likelihood({{&d, d.count, Regime::logged}}, m, D) == Approx(logged_ref).epsilon(1e-12));
        // Logged view without a decision rule (pooled): treated as interventions.
        CHECK(log_likelihood({{&d, d.count, Regime::logged}}, m, Matrix()) == Approx(pilot_ref).epsilon(1e-12));
        // Both views together: the sum.
        CHECK(log_likelihood({{&d, d.count, Regime::pilot}, {&d, d.count, Regime::logged}}, m, D) ==
              Approx(pilot_ref + logged_ref).epsilon(1e-12));
        // Prefix views: only the first `count` episodes.
        Dataset first = d;
        first.count = 2;
        CHECK(log_likelihood({{&d, 2, Regime::logged}}, m, D) == Approx(fb_brute_loglik(m, &D, first)).epsilon(1e-12));
        ++checked;
      }
  CHECK(checked == 16);
}

TEST_CASE("forward-backward: expected counts equal brute-force posterior marginals", "[forward_backward]") {
  // Reference: posterior marginals p(z_0), p(z_t, z_{t+1}), p(z_t) by brute-force enumeration of paths,
  // summed as in Rabiner 1989 eqs. 37-40 (initial, transitions per action, emissions per observation,
  // decision counts per (z_t, a_t) on the logged steps t < H of a regime-aware fit). The main case is
  // Z = 3, A = 2, O = 3, H = 3; latent sizes 1..8 are also run (H = 2) because the E-step may be
  // specialised by latent size.
  struct Case {
    int Z, O, H;
  };
  const Case cases[] = {{3, 3, 3}, {1, 2, 2}, {2, 2, 4}, {4, 3, 2}, {5, 2, 2}, {6, 3, 2}, {7, 2, 2}, {8, 3, 2}};
  Engine rng(4242);
  const int A = 2;
  for (const Case& k : cases) {
    const int Z = k.Z, O = k.O, H = k.H;
    const Pomdp m = fb_random_model(Z, A, O, H, rng);
    const Matrix D = fb_random_decision(Z, A, rng);
    const Dataset d = fb_random_dataset(5, H, A, O, rng);

    for (Regime regime : {Regime::pilot, Regime::logged}) {
      INFO("Z=" << Z << " O=" << O << " H=" << H << (regime == Regime::logged ? " logged" : " pilot"));
      ForwardBackward fb(Z, A, O, H);
      fb.load(m, &D);
      ExpectedCounts c;
      c.reset(Z, A, O);
      const double ll = fb.accumulate({&d, d.count, regime}, c);
      const ExpectedCounts ref = fb_brute_counts(m, regime == Regime::logged ? &D : nullptr, d);
      CHECK(ll == Approx(ref.loglik).epsilon(1e-12));
      CHECK(c.loglik == Approx(ref.loglik).epsilon(1e-12));
      CHECK(fb_max_abs_diff(c.initial, ref.initial) <= 1e-12);
      for (int a = 0; a < A; ++a)
        CHECK(fb_max_abs_diff(c.transitions[static_cast<std::size_t>(a)], ref.transitions[static_cast<std::size_t>(a)]) <= 1e-12);
      CHECK(fb_max_abs_diff(c.emissions, ref.emissions) <= 1e-12);
      CHECK(fb_max_abs_diff(c.decision, ref.decision) <= 1e-12);
      // Sanity of the reference itself: counts add up to what they count.
      CHECK(ref.initial.sum() == Approx(d.count));
      CHECK(ref.emissions.sum() == Approx(d.count * (H + 1)));
      if (regime == Regime::logged) CHECK(ref.decision.sum() == Approx(d.count * H));
    }

    // accumulate() adds to existing counts over two calls (the outer-product buffer is per call).
    INFO("Z=" << Z << " two views");
    ForwardBackward fb(Z, A, O, H);
    fb.load(m, &D);
    ExpectedCounts c;
    c.reset(Z, A, O);
    fb.accumulate({&d, d.count, Regime::pilot}, c);
    fb.accumulate({&d, d.count, Regime::logged}, c);
    const ExpectedCounts p = fb_brute_counts(m, nullptr, d);
    const ExpectedCounts l = fb_brute_counts(m, &D, d);
    CHECK(c.loglik == Approx(p.loglik + l.loglik).epsilon(1e-12));
    CHECK(fb_max_abs_diff(c.initial, p.initial + l.initial) <= 1e-12);
    for (int a = 0; a < A; ++a)
      CHECK(fb_max_abs_diff(c.transitions[static_cast<std::size_t>(a)],
                            p.transitions[static_cast<std::size_t>(a)] + l.transitions[static_cast<std::size_t>(a)]) <= 1e-12);
    CHECK(fb_max_abs_diff(c.emissions, p.emissions + l.emissions) <= 1e-12);
    CHECK(fb_max_abs_diff(c.decision, l.decision) <= 1e-12);
  }
}

TEST_CASE("forward-backward: episodes that stop early equal brute force over their own length", "[forward_backward]") {
  // Imported records may stop early: an episode of length L has o_0..o_L and a_0..a_{L-1}; its
  // likelihood and posterior marginals are those of an episode of horizon L. Reference: the same
  // brute-force enumeration over latent paths as above (Rabiner 1989 eqs. 37-40), run per episode
  // on its own length, including an episode of length 0 (o_0 only).
  Engine rng(777);
  const int Z = 3, A = 2, O = 3, H = 4;
  const Pomdp m = fb_random_model(Z, A, O, H, rng);
  const Matrix D = fb_random_decision(Z, A, rng);
  Dataset d = fb_random_dataset(5, H, A, O, rng);
  d.lengths = {4, 1, 0, 3, 2};
  CHECK(d.observations_in(5) == 15.0);
  for (Regime regime : {Regime::pilot, Regime::logged}) {
    INFO((regime == Regime::logged ? "logged" : "pilot"));
    ForwardBackward fb(Z, A, O, H);
    fb.load(m, &D);
    ExpectedCounts c;
    c.reset(Z, A, O);
    const double ll = fb.accumulate({&d, d.count, regime}, c);
    const ExpectedCounts ref = fb_brute_counts(m, regime == Regime::logged ? &D : nullptr, d);
    CHECK(ll == Approx(ref.loglik).epsilon(1e-12));
    CHECK(log_likelihood({{&d, d.count, regime}}, m, D) == Approx(ref.loglik).epsilon(1e-12));
    CHECK(fb_max_abs_diff(c.initial, ref.initial) <= 1e-12);
    for (int a = 0; a < A; ++a)
      CHECK(fb_max_abs_diff(c.transitions[static_cast<std::size_t>(a)], ref.transitions[static_cast<std::size_t>(a)]) <= 1e-12);
    CHECK(fb_max_abs_diff(c.emissions, ref.emissions) <= 1e-12);
    CHECK(fb_max_abs_diff(c.decision, ref.decision) <= 1e-12);
    CHECK(ref.initial.sum() == Approx(5.0));
    CHECK(ref.emissions.sum() == Approx(15.0));
    if (regime == Regime::logged) CHECK(ref.decision.sum() == Approx(10.0));
  }
}

TEST_CASE("forward-backward: batches of mixed lengths and partly filled lanes equal brute force",
          "[forward_backward]") {
  // The kernel runs 8 episodes at once (ForwardBackward::kLanes); a view whose count is not a
  // multiple of 8 leaves lanes empty, and episodes of one batch may stop at different steps.
  // Reference: the brute-force enumeration over latent paths above (Rabiner 1989 eqs. 37-40), per
  // episode on its own length. Latent sizes 2, 4 and 7 (compiled sizes) and 9 (the general kernel);
  // 1, 8, 13 and 19 episodes; lengths drawn from 0..H.
  struct Case {
    int Z, O, H, n;
  };
  const Case cases[] = {{2, 3, 4, 1}, {2, 2, 5, 19}, {4, 3, 3, 13}, {4, 2, 4, 8}, {7, 2, 2, 13}, {9, 3, 3, 13}};
  Engine rng(2026);
  const int A = 3;
  for (const Case& k : cases) {
    const Pomdp m = fb_random_model(k.Z, A, k.O, k.H, rng);
    const Matrix D = fb_random_decision(k.Z, A, rng);
    Dataset d = fb_random_dataset(k.n, k.H, A, k.O, rng);
    boost::random::uniform_int_distribution<int> ul(0, k.H);
    d.lengths.resize(static_cast<std::size_t>(k.n));
    for (auto& L : d.lengths) L = ul(rng);
    if (k.n > 1) d.lengths[1] = k.H;  // at least one full-length episode, and one of length 0
    if (k.n > 2) d.lengths[2] = 0;
    for (Regime regime : {Regime::pilot, Regime::logged}) {
      INFO("Z=" << k.Z << " O=" << k.O << " H=" << k.H << " n=" << k.n << (regime == Regime::logged ? " logged" : " pilot"));
      ForwardBackward fb(k.Z, A, k.O, k.H);
      fb.load(m, &D);
      ExpectedCounts c;
      c.reset(k.Z, A, k.O);
      const double ll = fb.accumulate({&d, d.count, regime}, c);
      const ExpectedCounts ref = fb_brute_counts(m, regime == Regime::logged ? &D : nullptr, d);
      CHECK(ll == Approx(ref.loglik).epsilon(1e-12));
      CHECK(fb.log_likelihood({&d, d.count, regime}) == Approx(ref.loglik).epsilon(1e-12));
      CHECK(fb_max_abs_diff(c.initial, ref.initial) <= 1e-12);
      for (int a = 0; a < A; ++a)
        CHECK(fb_max_abs_diff(c.transitions[static_cast<std::size_t>(a)], ref.transitions[static_cast<std::size_t>(a)]) <= 1e-12);
      CHECK(fb_max_abs_diff(c.emissions, ref.emissions) <= 1e-12);
      CHECK(fb_max_abs_diff(c.decision, ref.decision) <= 1e-12);
      CHECK(ref.initial.sum() == Approx(k.n));
      CHECK(ref.emissions.sum() == Approx(d.observations_in(k.n)));
    }
  }
}

// The order of operations forward_backward.hpp promises, written out one episode at a time in
// plain scalar double arithmetic (no vectors, no masks): scaled forward-backward (Rabiner 1989,
// sec. V.A), every sum from +0 in the stated order, each episode's counts added to the accumulator
// of lane (episode index mod kLanes) in step order t = L, L-1, ..., 0, and the lanes summed in
// lane order at the end of the call. IEEE 754 operations are correctly rounded, so an
// implementation that performs these operations in this order gives these bits whatever its
// layout (IEEE Std 754-2008, clause 11). Returns the call's log-likelihood and adds to `c`.
double fb_scalar_order(const Pomdp& m, const Matrix* D, const DataView& v, ExpectedCounts& c) {
  const int Z = m.states, A = m.actions, O = m.observations, W = ForwardBackward::kLanes;
  const bool w = v.regime == Regime::logged && D != nullptr && D->size() > 0;
  const Dataset& d = *v.data;
  auto ix = [](int i, int j, int n) { return static_cast<std::size_t>(i) * static_cast<std::size_t>(n) + static_cast<std::size_t>(j); };
  std::vector<double> X(static_cast<std::size_t>(W * A * Z * Z), 0.0), gE(static_cast<std::size_t>(W * O * Z), 0.0),
      gA(static_cast<std::size_t>(W * A * Z), 0.0), g0(static_cast<std::size_t>(W * Z), 0.0);
  double ll = 0.0;
  for (int i = 0; i < v.count; ++i) {
    const int l = i % W, L = d.length(i);
    const std::int32_t* o = d.obs(i);
    const std::int32_t* a = d.act(i);
    std::vector<double> e(ix(L + 1, 0, Z)), al(ix(L + 1, 0, Z)), sc(static_cast<std::size_t>(L + 1)),
        inv(static_cast<std::size_t>(L + 1)), beta(static_cast<std::size_t>(Z), 1.0), u(static_cast<std::size_t>(Z));
    // e_t(z) = qE(z, o_t) [x qA(z, a_t) on the logged steps t < L of a regime-aware fit]
    for (int t = 0; t <= L; ++t)
      for (int z = 0; z < Z; ++z) {
        double x = m.emissions(z, o[t]);
        if (w && t < L) x *= (*D)(z, a[t]);
        e[ix(t, z, Z)] = x;
      }
    auto normalise = [&](int t) {
      double s = 0.0;
      for (int z = 0; z < Z; ++z) s += al[ix(t, z, Z)];
      const double r = 1.0 / s;
      for (int z = 0; z < Z; ++z) al[ix(t, z, Z)] *= r;
      sc[static_cast<std::size_t>(t)] = s;
      inv[static_cast<std::size_t>(t)] = r;
    };
    for (int z = 0; z < Z; ++z) al[ix(0, z, Z)] = m.initial(z) * e[ix(0, z, Z)];
    normalise(0);
    for (int t = 0; t < L; ++t) {
      const Matrix& T = m.transitions[static_cast<std::size_t>(a[t])];
      for (int y = 0; y < Z; ++y) {
        double s = 0.0;
        for (int z = 0; z < Z; ++z) s += al[ix(t, z, Z)] * T(z, y);
        al[ix(t + 1, y, Z)] = s * e[ix(t + 1, y, Z)];
      }
      normalise(t + 1);
    }
    // log p = sum_t log c_t, as the log of a running product renewed below 1e-250
    double lp = 0.0, product = sc[0];
    for (int t = 1; t <= L; ++t) {
      product *= sc[static_cast<std::size_t>(t)];
      if (product < 1e-250) {
        lp += std::log(product);
        product = 1.0;
      }
    }
    ll += lp + std::log(product);
    // backward: beta_L = 1; u(y) = e_{t+1}(y) beta_{t+1}(y) / c_{t+1}; beta_t(z) = sum_y T[a_t](z, y) u(y)
    for (int t = L; t >= 0; --t) {
      if (t < L) {
        const Matrix& T = m.transitions[static_cast<std::size_t>(a[t])];
        for (int y = 0; y < Z; ++y) u[static_cast<std::size_t>(y)] = e[ix(t + 1, y, Z)] * beta[static_cast<std::size_t>(y)] * inv[static_cast<std::size_t>(t + 1)];
        for (int z = 0; z < Z; ++z) {
          double s = 0.0;
          for (int y = 0; y < Z; ++y) s += T(z, y) * u[static_cast<std::size_t>(y)];
          beta[static_cast<std::size_t>(z)] = s;
        }
        for (int z = 0; z < Z; ++z)
          for (int y = 0; y < Z; ++y) X[ix(ix(l, a[t], A), z, Z) * Z + y] += al[ix(t, z, Z)] * u[static_cast<std::size_t>(y)];
      }
      for (int z = 0; z < Z; ++z) {
        const double g = al[ix(t, z, Z)] * beta[static_cast<std::size_t>(z)];
        gE[ix(ix(l, o[t], O), z, Z)] += g;
        if (w && t < L) gA[ix(ix(l, a[t], A), z, Z)] += g;
        if (t == 0) g0[ix(l, z, Z)] += g * 1.0;
      }
    }
  }
  if (v.count == 0) return 0.0;
  auto lanes = [&](const std::vector<double>& x, std::size_t k, std::size_t per_lane) {
    double s = 0.0;
    for (int l = 0; l < W; ++l) s += x[static_cast<std::size_t>(l) * per_lane + k];
    return s;
  };
  for (int a = 0; a < A; ++a)
    for (int z = 0; z < Z; ++z)
      for (int y = 0; y < Z; ++y)
        c.transitions[static_cast<std::size_t>(a)](z, y) +=
            m.transitions[static_cast<std::size_t>(a)](z, y) * lanes(X, ix(ix(a, z, Z), y, Z), static_cast<std::size_t>(A * Z * Z));
  for (int z = 0; z < Z; ++z) {
    c.initial(z) += lanes(g0, static_cast<std::size_t>(z), static_cast<std::size_t>(Z));
    for (int o = 0; o < O; ++o) c.emissions(z, o) += lanes(gE, ix(o, z, Z), static_cast<std::size_t>(O * Z));
    if (w)
      for (int a = 0; a < A; ++a) c.decision(z, a) += lanes(gA, ix(a, z, Z), static_cast<std::size_t>(A * Z));
  }
  c.loglik += ll;
  return ll;
}

// Every build of the kernel this CPU supports against fb_scalar_order, bit for bit: two calls
// adding to the same counts (all episodes, then the first n_half), and the log-likelihood alone.
// Returns how many builds were compared.
int fb_compare_builds(const Pomdp& m, const Matrix* D, const Dataset& d, int n_half, Regime regime) {
  const int Z = m.states, A = m.actions, O = m.observations;
  ExpectedCounts ref;
  ref.reset(Z, A, O);
  fb_scalar_order(m, D, {&d, d.count, regime}, ref);
  fb_scalar_order(m, D, {&d, n_half, regime}, ref);
  int compared = 0;
  for (KernelPath path : {KernelPath::baseline, KernelPath::avx2, KernelPath::avx512}) {
    INFO("Z=" << Z << " A=" << A << " O=" << O << " H=" << d.horizon << " n=" << d.count << " path "
              << kernel_path_name(path) << (regime == Regime::logged ? " logged" : " pilot")
              << (D == nullptr ? " (no decision rule loaded)" : ""));
    if (!kernel_path_supported(path)) {
      WARN("kernel path " << kernel_path_name(path) << " not supported by this CPU: not compared");
      continue;
    }
    ForwardBackward fb(Z, A, O, d.horizon);
    fb.set_kernel_path(path);
    fb.load(m, D);
    ExpectedCounts c;
    c.reset(Z, A, O);
    fb.accumulate({&d, d.count, regime}, c);
    fb.accumulate({&d, n_half, regime}, c);
    CHECK(std::memcmp(&c.loglik, &ref.loglik, sizeof(double)) == 0);
    CHECK(same_bits(c.initial, ref.initial));
    for (int a = 0; a < A; ++a)
      CHECK(same_bits(c.transitions[static_cast<std::size_t>(a)], ref.transitions[static_cast<std::size_t>(a)]));
    CHECK(same_bits(c.emissions, ref.emissions));
    CHECK(same_bits(c.decision, ref.decision));
    ExpectedCounts once;
    once.reset(Z, A, O);
    const double ll_ref = fb_scalar_order(m, D, {&d, d.count, regime}, once);
    const double ll = fb.log_likelihood({&d, d.count, regime});
    CHECK(std::memcmp(&ll, &ll_ref, sizeof(double)) == 0);
    ++compared;
  }
  return compared;
}

TEST_CASE("forward-backward: every build of the kernel performs the operations of one episode run alone",
          "[forward_backward]") {
  // Sizes cover the compiled latent sizes (1-8), the general kernel (9, 11, 16: blocks of 8 and
  // single outputs), more than 4 and more than 8 actions or observations (a table permute needs at
  // most 4 with AVX2, 8 with AVX-512), one action, horizon 0, batches partly filled and episodes
  // that stop early (length 0 included).
  struct Case {
    int Z, A, O, H, n;
  };
  const Case cases[] = {{1, 2, 3, 5, 9},   {2, 2, 2, 8, 37},  {3, 3, 4, 6, 8},   {4, 2, 2, 8, 101},
                        {5, 3, 3, 7, 13},  {6, 2, 5, 9, 21},  {7, 3, 3, 4, 10},  {9, 2, 3, 4, 11},
                        {8, 3, 6, 20, 50}, {8, 1, 8, 6, 17},  {8, 9, 3, 5, 23},  {4, 4, 10, 6, 19},
                        {5, 6, 7, 5, 15},  {3, 8, 8, 4, 12},  {11, 3, 4, 5, 19}, {16, 2, 3, 4, 9},
                        {3, 2, 3, 0, 9}};
  Engine rng(23);
  int compared = 0;
  for (const Case& k : cases) {
    const Pomdp m = fb_random_model(k.Z, k.A, k.O, k.H, rng);
    const Matrix D = fb_random_decision(k.Z, k.A, rng);
    Dataset d = fb_random_dataset(k.n, k.H, k.A, k.O, rng);
    boost::random::uniform_int_distribution<int> ul(0, k.H);
    d.lengths.resize(static_cast<std::size_t>(k.n));
    for (int i = 0; i < k.n; ++i) d.lengths[static_cast<std::size_t>(i)] = i % 3 == 0 ? ul(rng) : k.H;
    for (Regime regime : {Regime::pilot, Regime::logged}) compared += fb_compare_builds(m, &D, d, k.n / 2, regime);
  }
  CHECK(compared >= 34);  // at least the baseline build for every case and regime

  SECTION("every episode of a batch shorter than the dataset's horizon") {
    const Pomdp m = fb_random_model(4, 3, 5, 9, rng);
    const Matrix D = fb_random_decision(4, 3, rng);
    Dataset d = fb_random_dataset(20, 9, 3, 5, rng);
    d.lengths.assign(20, 0);
    for (int i = 0; i < 20; ++i) d.lengths[static_cast<std::size_t>(i)] = i < 16 ? i % 7 : 9;  // two batches below 9
    CHECK(fb_compare_builds(m, &D, d, 10, Regime::logged) >= 1);
  }
  SECTION("a logged view with no decision rule loaded") {
    const Pomdp m = fb_random_model(5, 2, 4, 6, rng);
    const Dataset d = fb_random_dataset(13, 6, 2, 4, rng);
    CHECK(fb_compare_builds(m, nullptr, d, 6, Regime::logged) >= 1);
  }
  SECTION("a non-finite parameter of an action no episode takes stays out of every count") {
    // Steps past an episode's end (and empty lanes) run the forward pass with action 0: what they
    // compute must never reach a count or the log-likelihood, even when that matrix holds inf and
    // NaN (the reference never touches it).
    Pomdp m = fb_random_model(3, 2, 3, 7, rng);
    m.transitions[0](0, 0) = std::numeric_limits<double>::infinity();
    m.transitions[0](1, 2) = std::numeric_limits<double>::quiet_NaN();
    const Matrix D = fb_random_decision(3, 2, rng);
    Dataset d = fb_random_dataset(11, 7, 2, 3, rng);
    for (auto& a : d.actions) a = 1;
    d.lengths.assign(11, 7);
    for (int i = 0; i < 11; i += 2) d.lengths[static_cast<std::size_t>(i)] = i % 7;
    for (Regime regime : {Regime::pilot, Regime::logged}) CHECK(fb_compare_builds(m, &D, d, 5, regime) >= 1);
  }
  SECTION("negative zeros in the parameters are carried exactly") {
    Pomdp m = fb_random_model(4, 3, 4, 5, rng);
    m.emissions(1, 2) = -0.0;
    m.transitions[2](3, 1) = -0.0;
    const Matrix D = fb_random_decision(4, 3, rng);
    const Dataset d = fb_random_dataset(17, 5, 3, 4, rng);
    for (Regime regime : {Regime::pilot, Regime::logged}) CHECK(fb_compare_builds(m, &D, d, 8, regime) >= 1);
  }
}

TEST_CASE("forward-backward: maximise is the Dirichlet MAP update of brute-force counts", "[forward_backward]") {
  // Reference: MAP of a multinomial row under a symmetric Dirichlet(prior + 1): (N_j + prior) / sum_j (N_j + prior)
  // (*common practice*; e.g. Murphy, Machine Learning: a Probabilistic Perspective, 2012, sec. 3.4.3).
  Engine rng(5);
  const int Z = 2, A = 2, O = 3, H = 2;
  Pomdp m = fb_random_model(Z, A, O, H, rng);
  Matrix D = fb_random_decision(Z, A, rng);
  const Dataset d = fb_random_dataset(6, H, A, O, rng);
  const double prior = 0.7;
  const ExpectedCounts ref = fb_brute_counts(m, &D, d);
  const double ll = em_step({{&d, d.count, Regime::logged}}, prior, m, D);
  CHECK(ll == Approx(ref.loglik).epsilon(1e-12));
  for (int z = 0; z < Z; ++z) {
    CHECK(m.initial(z) == Approx((ref.initial(z) + prior) / (ref.initial.sum() + Z * prior)).epsilon(1e-12));
    for (int a = 0; a < A; ++a) {
      const Matrix& N = ref.transitions[static_cast<std::size_t>(a)];
      for (int y = 0; y < Z; ++y)
        CHECK(m.transitions[static_cast<std::size_t>(a)](z, y) ==
              Approx((N(z, y) + prior) / (N.row(z).sum() + Z * prior)).epsilon(1e-12));
    }
    for (int o = 0; o < O; ++o)
      CHECK(m.emissions(z, o) == Approx((ref.emissions(z, o) + prior) / (ref.emissions.row(z).sum() + O * prior)).epsilon(1e-12));
    for (int a = 0; a < A; ++a)
      CHECK(D(z, a) == Approx((ref.decision(z, a) + prior) / (ref.decision.row(z).sum() + A * prior)).epsilon(1e-12));
  }
}

// =============================================================================================
// 1d. EM never decreases the MAP objective.

TEST_CASE("forward-backward: EM never decreases log-likelihood + log prior", "[forward_backward]") {
  // Dempster, Laird and Rubin, "Maximum likelihood from incomplete data via the EM algorithm",
  // JRSS B 39(1), 1977, theorem 1 (and sec. 3 for the MAP case: the objective log p(x|q) + log p(q)).
  SyntheticFamily fam;
  fam.states = 3;
  fam.actions = 2;
  fam.observations = 2;
  fam.dynamics_concentration = 0.3;
  fam.observation_noise = 0.3;
  Engine env_rng(1234);
  Environment env;
  env.model = draw_pomdp(fam, 5, 1.0, env_rng);
  LoggingSettings ls;
  env.logging_policy = privileged_logging_policy(env.model, ls);
  Engine data_rng(77);
  const Dataset logged = simulate(env, Regime::logged, 150, data_rng);
  const Dataset pilot = simulate(env, Regime::pilot, 40, data_rng);

  for (bool regime_aware : {false, true})
    for (double prior : {0.1, 1.0}) {
      INFO("regime_aware=" << regime_aware << " prior=" << prior);
      Engine init(regime_aware ? 11 : 12);
      Pomdp m = fb_random_model(3, 2, 2, 5, init);
      Matrix D = regime_aware ? fb_random_decision(3, 2, init) : Matrix();
      const std::vector<DataView> views{{&pilot, pilot.count, Regime::pilot},
                                        {&logged, logged.count, regime_aware ? Regime::logged : Regime::pilot}};
      const Matrix* Dp = regime_aware ? &D : nullptr;
      double prev = -std::numeric_limits<double>::infinity();
      double first = 0.0;
      int decreases = 0;
      for (int it = 0; it < 80; ++it) {
        const double ll_now = log_likelihood(views, m, D);
        const double obj = ll_now + log_prior(m, Dp, prior);
        if (it == 0) first = obj;
        if (obj < prev - 1e-10 * std::abs(prev)) {
          ++decreases;
          WARN("objective decreased at iteration " << it << ": " << prev << " -> " << obj);
        }
        prev = obj;
        const double ll_step = em_step(views, prior, m, D);
        CHECK(ll_step == Approx(ll_now).epsilon(1e-12));  // em_step reports the likelihood before the step
      }
      CHECK(decreases == 0);
      CHECK(prev > first + 1.0);  // and it did move (the test is not vacuous)
    }
}

TEST_CASE("forward-backward: fit keeps the restart of highest objective and reports it consistently",
          "[forward_backward]") {
  // *common practice*: the reported objective must be loglik + log prior of the returned parameters.
  Engine rng(8);
  const Pomdp truth = fb_random_model(2, 2, 3, 4, rng);
  Environment env{truth, fb_random_decision(2, 2, rng)};
  const Dataset pilot = simulate(env, Regime::pilot, 60, rng);
  const Dataset logged = simulate(env, Regime::logged, 100, rng);
  FitSettings s;
  s.latent_states = 2;
  s.restarts = 4;
  s.max_iterations = 100;
  s.prior = 0.2;
  for (bool ra : {false, true}) {
    INFO("regime_aware=" << ra);
    const std::vector<DataView> views{{&pilot, pilot.count, Regime::pilot}, {&logged, logged.count, ra ? Regime::logged : Regime::pilot}};
    Engine frng(3);
    const FitResult f = fit(views, ra, s, truth, frng);
    CHECK(validate(f.model).empty());
    CHECK(f.decision.size() == (ra ? 4 : 0));
    const double ll = log_likelihood(views, f.model, f.decision);
    CHECK(f.loglik == Approx(ll).epsilon(1e-12));
    CHECK(f.objective == Approx(ll + log_prior(f.model, ra ? &f.decision : nullptr, s.prior)).epsilon(1e-12));
    REQUIRE(f.restart_objectives.size() == 4);
    for (double o : f.restart_objectives) CHECK(o <= f.objective);
    CHECK(f.restart_objectives[static_cast<std::size_t>(f.best_restart)] == f.objective);
  }
}
