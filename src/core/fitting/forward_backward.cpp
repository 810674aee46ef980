#include "core/fitting/forward_backward.hpp"

#include <algorithm>
#include <cmath>
#include <cstring>
#include <type_traits>

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
constexpr int kPack = 8;  // slots of one selection table (ForwardBackward::load)

// One batch of W episodes, as the kernel sees it (pointers into the ForwardBackward workspace).
struct Batch {
  int Z, A, O, H;  // H: the longest episode of the batch
  bool decision;   // e_t multiplies the decision rule, and gamma by action is wanted
  const double *q0, *qT, *qE, *qA;  // qT [a][z][z'], qE [z][o], qA [z][a]
  const double *pT, *pE, *pA;       // the same as selection tables: [z][z'][a], [z][o], [z][a], kPack slots each
  const double *ob, *ac;            // [t][l]: o_t and a_t of each lane, -1 past its end (and on empty lanes)
  double *alpha, *e, *g, *ul, *scale, *inv;  // [t][z][l] (ul: [t][z'][l]), scale and inv [t][l]
  const double* live;
  double* beta;  // Z W doubles
  double *X, *gE, *gA, *g0;
};

// The W lanes of a batch as W / N native vectors of N doubles (N = 8 for AVX-512, 4 for AVX2, 2 for
// SSE2), so that every build compares and selects at its own register width (GCC splits a wider
// vector's arithmetic into registers, but lowers its comparisons and selections lane by lane).
// Element-wise IEEE operations only; unaligned loads and stores.
// (The workspace is allocated as doubles and read through this type: with GCC a vector of doubles,
// and a struct of them, share the alias set of double, so this is well defined there.)
template <int N>
struct Lanes {
  typedef double D __attribute__((vector_size(N * sizeof(double)), aligned(sizeof(double))));
  typedef long long I __attribute__((vector_size(N * sizeof(long long)), aligned(sizeof(long long))));
  static constexpr int C = W / N;
  D v[C];

  struct Mask {
    I m[C];
  };
  [[gnu::always_inline]] static Lanes splat(double x) {
    Lanes r;
    double copies[N];
    for (int i = 0; i < N; ++i) copies[i] = x;  // a copy of x in every lane (-0 and NaN payloads kept)
    D d;
    std::memcpy(&d, copies, sizeof d);
    for (int c = 0; c < C; ++c) r.v[c] = d;
    return r;
  }
  [[gnu::always_inline]] Lanes& operator+=(const Lanes& o) {
    for (int c = 0; c < C; ++c) v[c] += o.v[c];
    return *this;
  }
  [[gnu::always_inline]] Lanes& operator*=(const Lanes& o) {
    for (int c = 0; c < C; ++c) v[c] *= o.v[c];
    return *this;
  }
  [[gnu::always_inline]] friend Lanes operator+(Lanes a, const Lanes& b) { return a += b; }
  [[gnu::always_inline]] friend Lanes operator*(Lanes a, const Lanes& b) { return a *= b; }
  [[gnu::always_inline]] friend Lanes operator*(Lanes a, double x) {
    for (int c = 0; c < C; ++c) a.v[c] *= x;
    return a;
  }
  [[gnu::always_inline]] friend Lanes operator*(double x, Lanes a) {
    for (int c = 0; c < C; ++c) a.v[c] = x * a.v[c];
    return a;
  }
  [[gnu::always_inline]] friend Lanes operator/(double x, const Lanes& a) {
    Lanes r;
    for (int c = 0; c < C; ++c) r.v[c] = x / a.v[c];
    return r;
  }
  [[gnu::always_inline]] friend Mask operator==(const Lanes& a, double x) {
    Mask r;
    for (int c = 0; c < C; ++c) r.m[c] = a.v[c] == x;
    return r;
  }
  [[gnu::always_inline]] friend Mask operator<(const Lanes& a, double x) {
    Mask r;
    for (int c = 0; c < C; ++c) r.m[c] = a.v[c] < x;
    return r;
  }
  // Lane by lane: m ? a : b (a selection: exact, whatever a and b hold).
  [[gnu::always_inline]] friend Lanes select(const Mask& m, const Lanes& a, const Lanes& b) {
    Lanes r;
    for (int c = 0; c < C; ++c) r.v[c] = m.m[c] ? a.v[c] : b.v[c];
    return r;
  }
};

template <class L>
[[gnu::always_inline]] inline L& at(double* p) {
  return *reinterpret_cast<L*>(p);
}
template <class L>
[[gnu::always_inline]] inline const L& at(const double* p) {
  return *reinterpret_cast<const L*>(p);
}

// Which parameter each lane needs, as a value (a_t or o_t; compared in the selection chain) and,
// for the table permute, as integers.
template <class L>
struct Index {
  L value;
  typename L::I whole[L::C];
};
template <class L, bool Perm>
[[gnu::always_inline]] inline Index<L> make_index(const L& value) {
  Index<L> r;
  r.value = value;
  if constexpr (Perm)
    for (int c = 0; c < L::C; ++c) r.whole[c] = __builtin_convertvector(value.v[c], typename L::I);
  return r;
}

// Lane l gets table[idx_l * stride], i.e. the parameter of the lane's own action or observation:
// a selection, exact whatever its implementation. Perm (the n entries fit in one register of N
// doubles: AVX-512 n <= 8, AVX2 n <= 4): one variable permute of the first N slots of the table
// `pack` per register (an index past the end, -1, gives slot N - 1). Otherwise a chain of
// selections among broadcast entries (an index outside 0..n-1 gives entry 0).
template <class L, bool Perm>
[[gnu::always_inline]] inline void pick(L& v, const double* pack, const double* table, std::ptrdiff_t stride, int n,
                                        const Index<L>& idx) {
  if constexpr (Perm) {
    const typename L::D t = *reinterpret_cast<const typename L::D*>(pack);
    for (int c = 0; c < L::C; ++c) v.v[c] = __builtin_shuffle(t, idx.whole[c]);
  } else {
    v = L::splat(table[0]);
    for (int k = 1; k < n; ++k) v = select(idx.value == static_cast<double>(k), L::splat(table[k * stride]), v);
  }
}

// c_t = sum_z alpha_t(z), summed from +0 in z order; alpha_t *= 1 / c_t.
template <class L, int ZC>
[[gnu::always_inline]] inline void normalise(const Batch& b, double* al, int t) {
  const int Z = ZC > 0 ? ZC : b.Z;
  L c = L::splat(0.0);
  for (int z = 0; z < Z; ++z) c += at<L>(al + z * W);
  const L inv = 1.0 / c;
  for (int z = 0; z < Z; ++z) at<L>(al + z * W) *= inv;
  at<L>(b.scale + t * W) = c;
  at<L>(b.inv + t * W) = inv;
}

// e_t(z) = qE(z, o_t) [x qA(z, a_t) on steps t < L of a lane when the decision rule is loaded];
// 1 past a lane's end, so the numbers there stay finite (a step past the end selects action 0 in
// the forward pass, and every count it could reach is left out by the selections below).
template <class L, int ZC, bool PermT, bool PermE>
[[gnu::always_inline]] inline void prepare(const Batch& b) {
  const int Z = ZC > 0 ? ZC : b.Z;
  const L one = L::splat(1.0);
  for (int t = 0; t <= b.H; ++t) {
    const L oi = at<L>(b.ob + t * W);
    const auto gone = oi < 0.0;
    const Index<L> io = make_index<L, PermE>(oi);
    double* e = b.e + static_cast<std::ptrdiff_t>(t) * Z * W;
    for (int z = 0; z < Z; ++z) {
      L q;
      pick<L, PermE>(q, b.pE + z * kPack, b.qE + z * b.O, 1, b.O, io);
      at<L>(e + z * W) = select(gone, one, q);
    }
    if (b.decision && t < b.H) {
      const L ai = at<L>(b.ac + t * W);
      const auto idle = ai < 0.0;
      const Index<L> ia = make_index<L, PermT>(ai);
      for (int z = 0; z < Z; ++z) {
        L q;
        pick<L, PermT>(q, b.pA + z * kPack, b.qA + z * b.A, 1, b.A, ia);
        at<L>(e + z * W) *= select(idle, one, q);
      }
    }
  }
}

// Output blocks: with the latent size fixed at compile time (ZC > 0) a step computes all ZC outputs
// at once, their accumulators in registers; otherwise (ZC = 0) in blocks of kBlock outputs and then
// one at a time. Every output is summed in the same order either way, so both give the same bits.
constexpr int kBlock = 8;

template <int ZC, typename Body>
[[gnu::always_inline]] inline void in_blocks(int Z, Body&& body) {
  if constexpr (ZC > 0) {
    body(std::integral_constant<int, ZC>{}, 0);
  } else {
    int k0 = 0;
    for (; k0 + kBlock <= Z; k0 += kBlock) body(std::integral_constant<int, kBlock>{}, k0);
    for (; k0 < Z; ++k0) body(std::integral_constant<int, 1>{}, k0);
  }
}

// Forward pass: alpha_t (normalised) and c_t, 1/c_t for t = 0..H of every lane:
//   alpha_{t+1}(z') = [sum_z alpha_t(z) qT[a_t](z, z')] e_{t+1}(z'), summed over z ascending from +0.
// (Lambdas below are always_inline: a lambda does not inherit its caller's target attribute.)
template <class L, int ZC, bool Perm>
[[gnu::always_inline]] inline void forward(const Batch& b) {
  const int Z = ZC > 0 ? ZC : b.Z;
  const std::ptrdiff_t ZW = static_cast<std::ptrdiff_t>(Z) * W, ZZ = static_cast<std::ptrdiff_t>(Z) * Z;
  for (int z = 0; z < Z; ++z) at<L>(b.alpha + z * W) = b.q0[z] * at<L>(b.e + z * W);
  normalise<L, ZC>(b, b.alpha, 0);
  const L zero = L::splat(0.0);
  for (int t = 0; t < b.H; ++t) {
    const double* prev = b.alpha + t * ZW;
    double* cur = b.alpha + (t + 1) * ZW;
    const double* e = b.e + (t + 1) * ZW;
    const L ai = at<L>(b.ac + t * W);
    const Index<L> fi = make_index<L, Perm>(select(ai < 0.0, zero, ai));  // past the end: action 0
    in_blocks<ZC>(Z, [&](auto block, int y0) __attribute__((always_inline)) {
      constexpr int B = decltype(block)::value;
      L s[B];
      for (int k = 0; k < B; ++k) s[k] = zero;
      for (int z = 0; z < Z; ++z) {
        const L p = at<L>(prev + z * W);
        for (int k = 0; k < B; ++k) {
          L q;
          pick<L, Perm>(q, b.pT + (z * Z + y0 + k) * kPack, b.qT + z * Z + y0 + k, ZZ, b.A, fi);
          s[k] += p * q;
        }
      }
      for (int k = 0; k < B; ++k) at<L>(cur + (y0 + k) * W) = s[k] * at<L>(e + (y0 + k) * W);
    });
    normalise<L, ZC>(b, cur, t + 1);
  }
}

// Backward pass: beta_H = 1 and, for t = H-1..0,
//   u_{t+1}(z') = (e_{t+1}(z') beta_{t+1}(z')) (1 / c_{t+1})   (kept as ul, 0 past the lane's end)
//   beta_t(z) = sum_z' qT[a_t](z, z') ul(z')                   (z' ascending from +0; 1 past the end)
//   gamma_t(z) = alpha_t(z) beta_t(z)                    (kept as g; g_H = alpha_H)
template <class L, int ZC, bool Perm>
[[gnu::always_inline]] inline void backward(const Batch& b) {
  const int Z = ZC > 0 ? ZC : b.Z;
  const std::ptrdiff_t ZW = static_cast<std::ptrdiff_t>(Z) * W, ZZ = static_cast<std::ptrdiff_t>(Z) * Z;
  const L one = L::splat(1.0), zero = L::splat(0.0);
  double* beta = b.beta;
  for (int z = 0; z < Z; ++z) at<L>(beta + z * W) = one;
  for (int z = 0; z < Z; ++z) at<L>(b.g + b.H * ZW + z * W) = at<L>(b.alpha + b.H * ZW + z * W);
  for (int t = b.H - 1; t >= 0; --t) {
    const double* e = b.e + (t + 1) * ZW;
    const L inv = at<L>(b.inv + (t + 1) * W);
    const L ai = at<L>(b.ac + t * W);
    const auto idle = ai < 0.0;
    const Index<L> fi = make_index<L, Perm>(select(idle, zero, ai));
    double* ul = b.ul + t * ZW;
    for (int y = 0; y < Z; ++y) at<L>(ul + y * W) = select(idle, zero, at<L>(e + y * W) * at<L>(beta + y * W) * inv);
    in_blocks<ZC>(Z, [&](auto block, int z0) __attribute__((always_inline)) {
      constexpr int B = decltype(block)::value;
      L s[B];
      for (int k = 0; k < B; ++k) s[k] = zero;
      for (int y = 0; y < Z; ++y) {
        const L v = at<L>(ul + y * W);
        for (int k = 0; k < B; ++k) {
          L q;
          pick<L, Perm>(q, b.pT + ((z0 + k) * Z + y) * kPack, b.qT + (z0 + k) * Z + y, ZZ, b.A, fi);
          s[k] += q * v;
        }
      }
      for (int k = 0; k < B; ++k) at<L>(beta + (z0 + k) * W) = select(idle, one, s[k]);
    });
    const double* al = b.alpha + t * ZW;
    double* g = b.g + t * ZW;
    for (int z = 0; z < Z; ++z) at<L>(g + z * W) = at<L>(al + z * W) * at<L>(beta + z * W);
  }
}

// X[a](z, z') += alpha_t(z) ul_t(z') on the lane's steps with a_t = a, t descending, for AC actions
// a0..a0+AC-1 and B outputs z' = y0..y0+B-1 at once (one product, AC selections); the counts of
// transitions are qT[a](z, z') X[a](z, z'), multiplied once per call (ForwardBackward::accumulate).
template <class L, int ZC, int B, int AC>
[[gnu::always_inline]] inline void add_transitions(const Batch& b, int a0, int z, int y0) {
  const int Z = ZC > 0 ? ZC : b.Z;
  const std::ptrdiff_t ZW = static_cast<std::ptrdiff_t>(Z) * W;
  L acc[AC][B];
  for (int k = 0; k < AC; ++k)
    for (int j = 0; j < B; ++j) acc[k][j] = at<L>(b.X + (((a0 + k) * Z + z) * Z + y0 + j) * W);
  for (int t = b.H - 1; t >= 0; --t) {
    const L ai = at<L>(b.ac + t * W);
    const L alz = at<L>(b.alpha + t * ZW + z * W);
    const double* ul = b.ul + t * ZW + y0 * W;
    for (int j = 0; j < B; ++j) {
      const L p = alz * at<L>(ul + j * W);
      for (int k = 0; k < AC; ++k) acc[k][j] = select(ai == static_cast<double>(a0 + k), acc[k][j] + p, acc[k][j]);
    }
  }
  for (int k = 0; k < AC; ++k)
    for (int j = 0; j < B; ++j) at<L>(b.X + (((a0 + k) * Z + z) * Z + y0 + j) * W) = acc[k][j];
}

template <class L, int ZC>
[[gnu::always_inline]] inline void count_transitions(const Batch& b) {
  const int Z = ZC > 0 ? ZC : b.Z;
  // As many actions at once as keep about 24 accumulators in registers.
  constexpr int B = ZC > 0 ? ZC : kBlock;
  constexpr int most = B >= 8 ? 3 : B >= 5 ? 4 : B >= 3 ? 6 : 8;
  for (int z = 0; z < Z; ++z)
    in_blocks<ZC>(Z, [&](auto block, int y0) __attribute__((always_inline)) {
      constexpr int BB = decltype(block)::value;
      constexpr int most_here = BB == 1 ? 8 : most;
      int a0 = 0;
      while (a0 < b.A) {
        const int n = std::min(most_here, b.A - a0);
        switch (n) {
          case 1: add_transitions<L, ZC, BB, 1>(b, a0, z, y0); break;
          case 2: add_transitions<L, ZC, BB, 2>(b, a0, z, y0); break;
          case 3: add_transitions<L, ZC, BB, 3>(b, a0, z, y0); break;
          case 4: add_transitions<L, ZC, BB, most_here >= 4 ? 4 : 1>(b, a0, z, y0); break;
          case 5: add_transitions<L, ZC, BB, most_here >= 5 ? 5 : 1>(b, a0, z, y0); break;
          case 6: add_transitions<L, ZC, BB, most_here >= 6 ? 6 : 1>(b, a0, z, y0); break;
          case 7: add_transitions<L, ZC, BB, most_here >= 7 ? 7 : 1>(b, a0, z, y0); break;
          default: add_transitions<L, ZC, BB, most_here >= 8 ? 8 : 1>(b, a0, z, y0); break;
        }
        a0 += n;
      }
    });
}

// gamma_t added by observation (t = H..0), by action (t = H-1..0, when wanted) and, at t = 0, to
// the initial counts; each sum over t descending, the accumulators in registers.
template <class L, int ZC>
[[gnu::always_inline]] inline void add_gamma(const Batch& b) {
  const int Z = ZC > 0 ? ZC : b.Z;
  const std::ptrdiff_t ZW = static_cast<std::ptrdiff_t>(Z) * W;
  auto by = [&](double* sums, const double* index, int n, int last) __attribute__((always_inline)) {
    for (int k = 0; k < n; ++k) {
      double* s = sums + static_cast<std::ptrdiff_t>(k) * ZW;
      in_blocks<ZC>(Z, [&](auto block, int z0) __attribute__((always_inline)) {
        constexpr int B = decltype(block)::value;
        L acc[B];
        for (int j = 0; j < B; ++j) acc[j] = at<L>(s + (z0 + j) * W);
        for (int t = last; t >= 0; --t) {
          const auto hit = at<L>(index + t * W) == static_cast<double>(k);
          const double* g = b.g + t * ZW + z0 * W;
          for (int j = 0; j < B; ++j) acc[j] = select(hit, acc[j] + at<L>(g + j * W), acc[j]);
        }
        for (int j = 0; j < B; ++j) at<L>(s + (z0 + j) * W) = acc[j];
      });
    }
  };
  by(b.gE, b.ob, b.O, b.H);
  if (b.decision) by(b.gA, b.ac, b.A, b.H - 1);
  const auto live = at<L>(b.live) == 1.0;
  for (int z = 0; z < Z; ++z) at<L>(b.g0 + z * W) = select(live, at<L>(b.g0 + z * W) + at<L>(b.g + z * W), at<L>(b.g0 + z * W));
}

template <class L, int ZC, bool Perm, bool PermE>
[[gnu::always_inline]] inline void run_batch(const Batch& b, bool counts) {
  prepare<L, ZC, Perm, PermE>(b);
  forward<L, ZC, Perm>(b);
  if (!counts) return;
  backward<L, ZC, Perm>(b);
  count_transitions<L, ZC>(b);
  add_gamma<L, ZC>(b);
}

template <class L, bool Perm, bool PermE>
[[gnu::always_inline]] inline void dispatch(const Batch& b, bool counts) {
  switch (b.Z) {
    case 1: run_batch<L, 1, Perm, PermE>(b, counts); break;
    case 2: run_batch<L, 2, Perm, PermE>(b, counts); break;
    case 3: run_batch<L, 3, Perm, PermE>(b, counts); break;
    case 4: run_batch<L, 4, Perm, PermE>(b, counts); break;
    case 5: run_batch<L, 5, Perm, PermE>(b, counts); break;
    case 6: run_batch<L, 6, Perm, PermE>(b, counts); break;
    case 7: run_batch<L, 7, Perm, PermE>(b, counts); break;
    case 8: run_batch<L, 8, Perm, PermE>(b, counts); break;
    default: run_batch<L, 0, Perm, PermE>(b, counts); break;
  }
}

// The same source compiled three times: for the x86-64 baseline (SSE2, 2 doubles a register), for
// AVX2 (4) and for AVX-512 (8). No FMA is enabled and -ffp-contract=off applies to all three, and
// every lane's arithmetic is written out element by element, so the builds differ only in register
// width and in how a selection is made (AVX-512 permutes a table when the actions and observations
// fit in its 8 slots, AVX2 when they fit in 4; otherwise, and in SSE2, a chain of selections).
void kernel_baseline(const Batch& b, bool counts) { dispatch<Lanes<2>, false, false>(b, counts); }
#if defined(__x86_64__) && defined(__GNUC__)
#define DOBUDGET_KERNEL_X86 1
__attribute__((target("avx2"))) void kernel_avx2(const Batch& b, bool counts) {
  if (b.A <= 4 && b.O <= 4)
    dispatch<Lanes<4>, true, true>(b, counts);
  else if (b.A <= 4)
    dispatch<Lanes<4>, true, false>(b, counts);
  else
    dispatch<Lanes<4>, false, false>(b, counts);
}
__attribute__((target("avx512f,avx512vl,avx512dq,prefer-vector-width=512"))) void kernel_avx512(const Batch& b,
                                                                                                 bool counts) {
  if (b.A <= kPack && b.O <= kPack)
    dispatch<Lanes<8>, true, true>(b, counts);
  else
    dispatch<Lanes<8>, false, false>(b, counts);
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
      qA_(static_cast<std::size_t>(Z) * A), pT_(static_cast<std::size_t>(Z) * Z * kPack),
      pE_(static_cast<std::size_t>(Z) * kPack), pA_(static_cast<std::size_t>(Z) * kPack),
      alpha_(static_cast<std::size_t>(H + 1) * Z * W), e_(static_cast<std::size_t>(H + 1) * Z * W),
      g_(static_cast<std::size_t>(H + 1) * Z * W), ul_(static_cast<std::size_t>(std::max(H, 1)) * Z * W),
      scale_(static_cast<std::size_t>(H + 1) * W), inv_(static_cast<std::size_t>(H + 1) * W),
      live_(W), beta_(static_cast<std::size_t>(Z) * W), len_(W),
      ob_(static_cast<std::size_t>(H + 1) * W), ac_(static_cast<std::size_t>(std::max(H, 1)) * W),
      X_(static_cast<std::size_t>(A) * Z * Z * W), gE_(static_cast<std::size_t>(O) * Z * W),
      gA_(static_cast<std::size_t>(A) * Z * W), g0_(static_cast<std::size_t>(Z) * W) {}

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
  // Selection tables (kPack slots, the unused ones 0): pT [z][z'][a], pE [z][o], pA [z][a].
  std::fill(pT_.begin(), pT_.end(), 0.0);
  std::fill(pE_.begin(), pE_.end(), 0.0);
  std::fill(pA_.begin(), pA_.end(), 0.0);
  if (A_ <= kPack) {
    for (int a = 0; a < A_; ++a)
      for (int z = 0; z < Z_; ++z)
        for (int y = 0; y < Z_; ++y)
          pT_[(static_cast<std::size_t>(z) * Z_ + y) * kPack + a] = qT_[(static_cast<std::size_t>(a) * Z_ + z) * Z_ + y];
    if (has_decision_)
      for (int z = 0; z < Z_; ++z)
        for (int a = 0; a < A_; ++a) pA_[static_cast<std::size_t>(z) * kPack + a] = qA_[z * A_ + a];
  }
  if (O_ <= kPack)
    for (int z = 0; z < Z_; ++z)
      for (int o = 0; o < O_; ++o) pE_[static_cast<std::size_t>(z) * kPack + o] = qE_[z * O_ + o];
}

double ForwardBackward::run(const DataView& view, bool counts) {
  const Dataset& d = *view.data;
  const bool w = view.regime == Regime::logged && has_decision_;
  const Kernel kernel = kernel_for(path_);
  Batch b{Z_, A_, O_, 0, w, q0_.data(), qT_.data(), qE_.data(), qA_.data(), pT_.data(), pE_.data(), pA_.data(),
          ob_.data(), ac_.data(), alpha_.data(), e_.data(), g_.data(), ul_.data(), scale_.data(), inv_.data(),
          live_.data(), beta_.data(), X_.data(), gE_.data(), gA_.data(), g0_.data()};
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
