#include "core/fitting/forward_backward.hpp"

#include <algorithm>
#include <cmath>

namespace dobudget {

void ExpectedCounts::reset(int Z, int A, int O) {
  initial = Vector::Zero(Z);
  transitions.assign(static_cast<std::size_t>(A), Matrix::Zero(Z, Z));
  emissions = Matrix::Zero(Z, O);
  decision = Matrix::Zero(Z, A);
  loglik = 0.0;
}

namespace {

constexpr int W = ForwardBackward::kLanes;

// One batch of W episodes, as the kernel sees it (pointers into the ForwardBackward workspace).
struct Batch {
  int Z, A, O, H;  // H: the longest episode of the batch
  bool decision;   // gamma by action is wanted (logged view of a regime-aware fit)
  const double *q0, *qT, *qE, *qA;
  const double *ob, *ac;  // [t][l]: o_t and a_t of each lane, -1 past its end (and on empty lanes)
  double *alpha, *e, *scale, *inv;
  double *fmask, *cmask, *omask, *idle;
  const double* live;
  double* work;  // (2A + 3) Z W doubles
  double *X, *gE, *gA, *g0;
  double* ua;  // H A Z W doubles
};

// W lanes as one GCC vector (element-wise IEEE operations; the compiler splits it into as many
// registers as the target has: 4 SSE2, 2 AVX2 or 1 AVX-512). Unaligned loads and stores.
typedef double V __attribute__((vector_size(W * sizeof(double)), aligned(sizeof(double))));
[[gnu::always_inline]] inline V& at(double* p) { return *reinterpret_cast<V*>(p); }
[[gnu::always_inline]] inline const V& at(const double* p) { return *reinterpret_cast<const V*>(p); }

// c_t = sum_z alpha_t(z), summed from +0 in z order; alpha_t *= 1 / c_t.
template <int ZC>
[[gnu::always_inline]] inline void normalise(const Batch& b, double* al, int t) {
  const int Z = ZC > 0 ? ZC : b.Z;
  V c = {};
  for (int z = 0; z < Z; ++z) c += at(al + z * W);
  const V inv = 1.0 / c;
  for (int z = 0; z < Z; ++z) at(al + z * W) *= inv;
  at(b.scale + t * W) = c;
  at(b.inv + t * W) = inv;
}

// Masks and e_t(z) = qE(z, o_t) w_t(z) of the batch. An observation or action mask is 1 where the
// lane has that o_t or a_t, else 0; past a lane's end (and on empty lanes) every mask is 0, the
// forward mask selects action 0 and e = 1, so the numbers there stay finite while every count they
// could reach is multiplied by 0. Selecting by 0/1 masks summed from +0 is exact:
// e = [sum_o om(o) qE(z, o) + (1 past the end)] [sum_a cm(a) qA(z, a) + (1 without an action)].
template <int ZC>
[[gnu::always_inline]] inline void prepare(const Batch& b) {
  const int Z = ZC > 0 ? ZC : b.Z;
  const int A = b.A, O = b.O;
  for (int t = 0; t <= b.H; ++t) {
    const V ob = at(b.ob + t * W), one = V{} + 1.0, zero = {};
    double* om = b.omask + static_cast<std::ptrdiff_t>(t) * O * W;
    for (int o = 0; o < O; ++o) at(om + o * W) = ob == static_cast<double>(o) ? one : zero;
    const V gone = ob < 0.0 ? one : zero;
    double* e = b.e + static_cast<std::ptrdiff_t>(t) * Z * W;
    for (int z = 0; z < Z; ++z) {
      V v = {};
      for (int o = 0; o < O; ++o) v += at(om + o * W) * b.qE[z * O + o];
      at(e + z * W) = v + gone;
    }
    if (t == b.H) break;
    const V ac = at(b.ac + t * W);
    double* cm = b.cmask + static_cast<std::ptrdiff_t>(t) * A * W;
    double* fm = b.fmask + static_cast<std::ptrdiff_t>(t) * A * W;
    const V idle = ac < 0.0 ? one : zero;
    at(b.idle + t * W) = idle;
    for (int a = 0; a < A; ++a) {
      at(cm + a * W) = ac == static_cast<double>(a) ? one : zero;
      at(fm + a * W) = a == 0 ? at(cm) + idle : at(cm + a * W);
    }
    if (b.decision)
      for (int z = 0; z < Z; ++z) {
        V v = {};
        for (int a = 0; a < A; ++a) v += at(cm + a * W) * b.qA[z * A + a];
        at(e + z * W) *= v + idle;
      }
  }
}

// Forward pass: alpha_t (normalised) and c_t, 1/c_t for t = 0..H of every lane.
// ZC > 0 fixes the latent size at compile time (all Z outputs of a step accumulate at once);
// ZC = 0 is the general case (one output at a time). Both sum each output over (a, z) ascending
// from +0, so they give the same bits.
template <int ZC>
[[gnu::always_inline]] inline void forward(const Batch& b) {
  const int Z = ZC > 0 ? ZC : b.Z;
  const int A = b.A;
  const std::ptrdiff_t ZW = static_cast<std::ptrdiff_t>(Z) * W;
  for (int z = 0; z < Z; ++z) at(b.alpha + z * W) = b.q0[z] * at(b.e + z * W);
  normalise<ZC>(b, b.alpha, 0);
  double* pa = b.work;  // [a][z][l]: alpha_t(z) masked to the lane's action a_t
  for (int t = 0; t < b.H; ++t) {
    const double* prev = b.alpha + t * ZW;
    double* cur = b.alpha + (t + 1) * ZW;
    const double* fm = b.fmask + static_cast<std::ptrdiff_t>(t) * A * W;
    const double* e = b.e + (t + 1) * ZW;
    for (int a = 0; a < A; ++a) {
      const V m = at(fm + a * W);
      for (int z = 0; z < Z; ++z) at(pa + (a * Z + z) * W) = at(prev + z * W) * m;
    }
    // cur(z') = [sum_a sum_z pa(a, z) qT[a](z, z')] e_{t+1}(z')
    if constexpr (ZC > 0) {
      V s[ZC] = {};
      for (int a = 0; a < A; ++a)
        for (int z = 0; z < ZC; ++z) {
          const V p = at(pa + (a * ZC + z) * W);
          const double* T = b.qT + (a * ZC + z) * ZC;
          for (int y = 0; y < ZC; ++y) s[y] += p * T[y];
        }
      for (int y = 0; y < ZC; ++y) at(cur + y * W) = s[y] * at(e + y * W);
    } else {
      for (int y = 0; y < Z; ++y) {
        V s = {};
        for (int a = 0; a < A; ++a)
          for (int z = 0; z < Z; ++z) s += at(pa + (a * Z + z) * W) * b.qT[(a * Z + z) * Z + y];
        at(cur + y * W) = s * at(e + y * W);
      }
    }
    normalise<ZC>(b, cur, t + 1);
  }
}

// gamma_t(z) = alpha_t(z) beta_t(z), added by observation (om), by action (am, when wanted) and,
// at t = 0, to the initial counts.
template <int ZC>
[[gnu::always_inline]] inline void add_gamma(const Batch& b, const double* g, int t) {
  const int Z = ZC > 0 ? ZC : b.Z;
  const double* om = b.omask + static_cast<std::ptrdiff_t>(t) * b.O * W;
  for (int o = 0; o < b.O; ++o) {
    const V m = at(om + o * W);
    for (int z = 0; z < Z; ++z) at(b.gE + (o * Z + z) * W) += at(g + z * W) * m;
  }
  if (b.decision && t < b.H) {
    const double* am = b.cmask + static_cast<std::ptrdiff_t>(t) * b.A * W;
    for (int a = 0; a < b.A; ++a) {
      const V m = at(am + a * W);
      for (int z = 0; z < Z; ++z) at(b.gA + (a * Z + z) * W) += at(g + z * W) * m;
    }
  }
  if (t == 0)
    for (int z = 0; z < Z; ++z) at(b.g0 + z * W) += at(g + z * W) * at(b.live);
}

// Backward pass and expected counts: beta_t = qT[a_t] u_{t+1} (1 past the lane's end) and
// X[a](z, z') += alpha_t(z) u_{t+1}(z') on the lane's steps with a_t = a; the counts of transitions
// are qT[a](z, z') X[a](z, z'), multiplied once per call (ForwardBackward::accumulate).
template <int ZC>
[[gnu::always_inline]] inline void backward(const Batch& b) {
  const int Z = ZC > 0 ? ZC : b.Z;
  const int A = b.A;
  const std::ptrdiff_t ZW = static_cast<std::ptrdiff_t>(Z) * W;
  double* beta = b.work;
  double* u = beta + ZW;
  double* g = u + ZW;
  // ua: [t][a][z'][l], u_{t+1} masked to the lane's action a_t (0 past its end), kept for the counts
  double* const ua_all = b.ua;
  for (int z = 0; z < Z; ++z) at(beta + z * W) = V{} + 1.0;
  add_gamma<ZC>(b, b.alpha + b.H * ZW, b.H);  // gamma_H = alpha_H
  for (int t = b.H - 1; t >= 0; --t) {
    const double* e = b.e + (t + 1) * ZW;
    const V inv = at(b.inv + (t + 1) * W);
    const double* cm = b.cmask + static_cast<std::ptrdiff_t>(t) * A * W;
    const V idle = at(b.idle + t * W);
    const double* al = b.alpha + t * ZW;
    double* ua = ua_all + t * A * ZW;
    for (int y = 0; y < Z; ++y) at(u + y * W) = at(e + y * W) * at(beta + y * W) * inv;
    for (int a = 0; a < A; ++a) {
      const V m = at(cm + a * W);
      for (int y = 0; y < Z; ++y) at(ua + (a * Z + y) * W) = at(u + y * W) * m;
    }
    // beta_t(z) = sum_a sum_z' qT[a](z, z') ua(a, z') (+ 1 on lanes past their end, where ua = 0)
    if constexpr (ZC > 0) {
      V s[ZC] = {};
      for (int a = 0; a < A; ++a)
        for (int y = 0; y < ZC; ++y) {
          const V v = at(ua + (a * ZC + y) * W);
          for (int z = 0; z < ZC; ++z) s[z] += b.qT[(a * ZC + z) * ZC + y] * v;
        }
      for (int z = 0; z < ZC; ++z) at(beta + z * W) = s[z] + idle;
    } else {
      for (int z = 0; z < Z; ++z) {
        V s = {};
        for (int a = 0; a < A; ++a)
          for (int y = 0; y < Z; ++y) s += b.qT[(a * Z + z) * Z + y] * at(ua + (a * Z + y) * W);
        at(beta + z * W) = s + idle;
      }
    }
    for (int z = 0; z < Z; ++z) at(g + z * W) = at(al + z * W) * at(beta + z * W);
    add_gamma<ZC>(b, g, t);
  }
  // X[a](z, z') += alpha_t(z) ua_t(a, z'), t descending (the accumulators stay in registers over t).
  for (int a = 0; a < A; ++a)
    for (int z = 0; z < Z; ++z) {
      double* x = b.X + (static_cast<std::ptrdiff_t>(a * Z + z) * Z) * W;
      if constexpr (ZC > 0) {
        V acc[ZC];
        for (int y = 0; y < ZC; ++y) acc[y] = at(x + y * W);
        for (int t = b.H - 1; t >= 0; --t) {
          const V alz = at(b.alpha + t * ZW + z * W);
          const double* ua = ua_all + (t * A + a) * ZW;
          for (int y = 0; y < ZC; ++y) acc[y] += alz * at(ua + y * W);
        }
        for (int y = 0; y < ZC; ++y) at(x + y * W) = acc[y];
      } else {
        for (int y = 0; y < Z; ++y) {
          V acc = at(x + y * W);
          for (int t = b.H - 1; t >= 0; --t) acc += at(b.alpha + t * ZW + z * W) * at(ua_all + (t * A + a) * ZW + y * W);
          at(x + y * W) = acc;
        }
      }
    }
}

template <int ZC>
[[gnu::always_inline]] inline void run_batch(const Batch& b, bool counts) {
  prepare<ZC>(b);
  forward<ZC>(b);
  if (counts) backward<ZC>(b);
}

[[gnu::always_inline]] inline void dispatch(const Batch& b, bool counts) {
  switch (b.Z) {
    case 1: run_batch<1>(b, counts); break;
    case 2: run_batch<2>(b, counts); break;
    case 3: run_batch<3>(b, counts); break;
    case 4: run_batch<4>(b, counts); break;
    case 5: run_batch<5>(b, counts); break;
    case 6: run_batch<6>(b, counts); break;
    case 8: run_batch<8>(b, counts); break;
    default: run_batch<0>(b, counts); break;
  }
}

// The same source compiled three times: for the x86-64 baseline (SSE2), for AVX2 and for
// AVX-512. No FMA is enabled and -ffp-contract=off applies to all three, and every lane's
// arithmetic is written out element by element, so the builds differ only in vector width.
void kernel_baseline(const Batch& b, bool counts) { dispatch(b, counts); }
#if defined(__x86_64__) && defined(__GNUC__)
#define DOBUDGET_KERNEL_X86 1
__attribute__((target("avx2"))) void kernel_avx2(const Batch& b, bool counts) { dispatch(b, counts); }
__attribute__((target("avx512f,avx512vl,avx512dq,prefer-vector-width=512"))) void kernel_avx512(const Batch& b,
                                                                                                 bool counts) {
  dispatch(b, counts);
}
#endif

using Kernel = void (*)(const Batch&, bool);

Kernel kernel_for(KernelPath p) {
#ifdef DOBUDGET_KERNEL_X86
  if (p == KernelPath::avx512) return &kernel_avx512;
  if (p == KernelPath::avx2) return &kernel_avx2;
#endif
  return &kernel_baseline;
}

}  // namespace

bool kernel_path_supported(KernelPath p) {
  switch (p) {
    case KernelPath::baseline:
    case KernelPath::best: return true;
#ifdef DOBUDGET_KERNEL_X86
    case KernelPath::avx2: return __builtin_cpu_supports("avx2");
    case KernelPath::avx512:
      return __builtin_cpu_supports("avx512f") && __builtin_cpu_supports("avx512vl") &&
             __builtin_cpu_supports("avx512dq");
#endif
    default: return false;
  }
}

KernelPath best_kernel_path() {
  static const KernelPath best = kernel_path_supported(KernelPath::avx512) ? KernelPath::avx512
                                 : kernel_path_supported(KernelPath::avx2) ? KernelPath::avx2
                                                                           : KernelPath::baseline;
  return best;
}

const char* kernel_path_name(KernelPath p) {
  switch (p) {
    case KernelPath::baseline: return "baseline";
    case KernelPath::avx2: return "avx2";
    case KernelPath::avx512: return "avx512";
    case KernelPath::best: return kernel_path_name(best_kernel_path());
  }
  return "?";
}

ForwardBackward::ForwardBackward(int Z, int A, int O, int H)
    : Z_(Z), A_(A), O_(O), H_(H), path_(best_kernel_path()),
      q0_(Z), qT_(static_cast<std::size_t>(A) * Z * Z), qE_(static_cast<std::size_t>(Z) * O),
      qA_(static_cast<std::size_t>(Z) * A),
      alpha_(static_cast<std::size_t>(H + 1) * Z * W), e_(static_cast<std::size_t>(H + 1) * Z * W),
      scale_(static_cast<std::size_t>(H + 1) * W), inv_(static_cast<std::size_t>(H + 1) * W),
      fmask_(static_cast<std::size_t>(std::max(H, 1)) * A * W), cmask_(static_cast<std::size_t>(std::max(H, 1)) * A * W),
      omask_(static_cast<std::size_t>(H + 1) * O * W), live_(W),
      work_(static_cast<std::size_t>(2 * A + 3) * Z * W), len_(W),
      X_(static_cast<std::size_t>(A) * Z * Z * W), gE_(static_cast<std::size_t>(O) * Z * W),
      gA_(static_cast<std::size_t>(A) * Z * W), g0_(static_cast<std::size_t>(Z) * W), ll_(W) {
  idle_.resize(static_cast<std::size_t>(std::max(H, 1)) * W);
  ob_.resize(static_cast<std::size_t>(H + 1) * W);
  ac_.resize(static_cast<std::size_t>(std::max(H, 1)) * W);
  ua_.resize(static_cast<std::size_t>(std::max(H, 1)) * A * Z * W);
}

void ForwardBackward::set_kernel_path(KernelPath p) { path_ = p == KernelPath::best ? best_kernel_path() : p; }

void ForwardBackward::load(const Pomdp& m, const Matrix* decision) {
  for (int z = 0; z < Z_; ++z) q0_[z] = m.initial(z);
  for (int z = 0; z < Z_; ++z)
    for (int o = 0; o < O_; ++o) qE_[z * O_ + o] = m.emissions(z, o);
  has_decision_ = decision != nullptr && decision->size() > 0;
  if (has_decision_)
    for (int z = 0; z < Z_; ++z)
      for (int a = 0; a < A_; ++a) qA_[z * A_ + a] = (*decision)(z, a);
  for (int a = 0; a < A_; ++a) {
    const Matrix& T = m.transitions[static_cast<std::size_t>(a)];
    for (int z = 0; z < Z_; ++z)
      for (int y = 0; y < Z_; ++y) qT_[(static_cast<std::size_t>(a) * Z_ + z) * Z_ + y] = T(z, y);
  }
}

double ForwardBackward::run(const DataView& view, bool counts) {
  const Dataset& d = *view.data;
  const bool w = view.regime == Regime::logged && has_decision_;
  const Kernel kernel = kernel_for(path_);
  Batch b{Z_, A_, O_, 0, w, q0_.data(), qT_.data(), qE_.data(), qA_.data(), ob_.data(), ac_.data(),
          alpha_.data(), e_.data(), scale_.data(), inv_.data(), fmask_.data(), cmask_.data(), omask_.data(),
          idle_.data(), live_.data(), work_.data(), X_.data(), gE_.data(), gA_.data(), g0_.data(), ua_.data()};
  double ll = 0.0;
  for (int first = 0; first < view.count; first += W) {
    const int n = std::min(W, view.count - first);
    int H = 0;
    for (int l = 0; l < W; ++l) {
      len_[l] = l < n ? d.length(first + l) : -1;
      live_[l] = l < n ? 1.0 : 0.0;
      H = std::max(H, len_[l]);
    }
    b.H = H;
    // The batch's observations and actions, lane index fastest (-1 past a lane's end).
    for (int l = 0; l < W; ++l) {
      const int L = len_[l];
      const std::int32_t* o = L >= 0 ? d.obs(first + l) : nullptr;
      const std::int32_t* a = L >= 0 ? d.act(first + l) : nullptr;
      for (int t = 0; t <= H; ++t) ob_[static_cast<std::size_t>(t) * W + l] = t <= L ? o[t] : -1;
      for (int t = 0; t < H; ++t) ac_[static_cast<std::size_t>(t) * W + l] = t < L ? a[t] : -1;
    }
    kernel(b, counts);
    // log p = sum_t log c_t, taken as the log of a running product (one log per episode unless the
    // product nears the bottom of the double range); summed over episodes in their order.
    for (int l = 0; l < n; ++l) {
      double lp = 0.0, product = scale_[static_cast<std::size_t>(l)];
      for (int t = 1; t <= len_[l]; ++t) {
        product *= scale_[static_cast<std::size_t>(t) * W + l];
        if (product < 1e-250) {
          lp += std::log(product);
          product = 1.0;
        }
      }
      ll += lp + std::log(product);
    }
  }
  return ll;
}

double ForwardBackward::accumulate(const DataView& view, ExpectedCounts& counts) {
  if (view.count == 0) return 0.0;
  std::fill(X_.begin(), X_.end(), 0.0);
  std::fill(gE_.begin(), gE_.end(), 0.0);
  std::fill(gA_.begin(), gA_.end(), 0.0);
  std::fill(g0_.begin(), g0_.end(), 0.0);
  const double ll = run(view, true);
  // Lanes are summed in lane order, from +0. N_T[a](z, z') += qT[a](z, z') X[a](z, z').
  auto lanes = [](const double* x) {
    double s = 0.0;
    for (int l = 0; l < W; ++l) s += x[l];
    return s;
  };
  for (int a = 0; a < A_; ++a) {
    Matrix& N = counts.transitions[static_cast<std::size_t>(a)];
    for (int z = 0; z < Z_; ++z)
      for (int y = 0; y < Z_; ++y) {
        const std::size_t k = (static_cast<std::size_t>(a) * Z_ + z) * Z_ + y;
        N(z, y) += qT_[k] * lanes(X_.data() + k * W);
      }
  }
  for (int z = 0; z < Z_; ++z) {
    counts.initial(z) += lanes(g0_.data() + static_cast<std::size_t>(z) * W);
    for (int o = 0; o < O_; ++o) counts.emissions(z, o) += lanes(gE_.data() + (static_cast<std::size_t>(o) * Z_ + z) * W);
    if (view.regime == Regime::logged && has_decision_)
      for (int a = 0; a < A_; ++a) counts.decision(z, a) += lanes(gA_.data() + (static_cast<std::size_t>(a) * Z_ + z) * W);
  }
  counts.loglik += ll;
  return ll;
}

double ForwardBackward::log_likelihood(const DataView& view) {
  if (view.count == 0) return 0.0;
  return run(view, false);
}

namespace {

// row <- (counts + prior) / sum; a row with no mass and no prior stays uniform.
template <typename RowIn, typename RowOut>
void normalise_row(const RowIn& counts, double prior, RowOut&& out) {
  const auto n = counts.size();
  double s = 0.0;
  for (Eigen::Index j = 0; j < n; ++j) s += counts(j) + prior;
  for (Eigen::Index j = 0; j < n; ++j) out(j) = s > 0.0 ? (counts(j) + prior) / s : 1.0 / static_cast<double>(n);
}

}  // namespace

void maximise(const ExpectedCounts& c, double prior, Pomdp& m, Matrix* decision) {
  normalise_row(c.initial, prior, m.initial);
  for (int a = 0; a < m.actions; ++a)
    for (int z = 0; z < m.states; ++z)
      normalise_row(c.transitions[static_cast<std::size_t>(a)].row(z), prior, m.transitions[static_cast<std::size_t>(a)].row(z));
  for (int z = 0; z < m.states; ++z) normalise_row(c.emissions.row(z), prior, m.emissions.row(z));
  if (decision != nullptr && decision->size() > 0)
    for (int z = 0; z < m.states; ++z) normalise_row(c.decision.row(z), prior, decision->row(z));
}

double log_prior(const Pomdp& m, const Matrix* decision, double prior) {
  if (prior == 0.0) return 0.0;
  double s = m.initial.array().log().sum();
  for (const auto& T : m.transitions) s += T.array().log().sum();
  s += m.emissions.array().log().sum();
  if (decision != nullptr && decision->size() > 0) s += decision->array().log().sum();
  return prior * s;
}

}  // namespace dobudget
