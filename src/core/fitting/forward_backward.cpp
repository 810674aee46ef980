#include "core/fitting/forward_backward.hpp"

#include <cmath>

namespace dobudget {

void ExpectedCounts::reset(int Z, int A, int O) {
  initial = Vector::Zero(Z);
  transitions.assign(static_cast<std::size_t>(A), Matrix::Zero(Z, Z));
  emissions = Matrix::Zero(Z, O);
  decision = Matrix::Zero(Z, A);
  loglik = 0.0;
}

ForwardBackward::ForwardBackward(int Z, int A, int O, int H)
    : Z_(Z), A_(A), O_(O), H_(H),
      q0_(Z), qE_(static_cast<std::size_t>(Z) * O), qA_(static_cast<std::size_t>(Z) * A),
      M_(static_cast<std::size_t>(A) * O * Z * Z),
      alpha_(static_cast<std::size_t>(H + 1) * Z), scale_(static_cast<std::size_t>(H + 1)),
      beta_(Z), next_(Z), tmp_(Z), outer_(static_cast<std::size_t>(A) * O * Z * Z),
      gamma_E_(static_cast<std::size_t>(O) * Z), gamma_A_(static_cast<std::size_t>(A) * Z) {}

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
    for (int o = 0; o < O_; ++o) {
      double* Mao = M_.data() + (static_cast<std::size_t>(a) * O_ + o) * Z_ * Z_;
      for (int z = 0; z < Z_; ++z)
        for (int y = 0; y < Z_; ++y) Mao[z * Z_ + y] = T(z, y) * qE_[y * O_ + o];
    }
  }
}

namespace {

// Fixed-size Eigen types when the latent size is known at compile time (ZC > 0): Eigen then
// unrolls and vectorises the small products explicitly.
template <int ZC>
using ZVec = Eigen::Matrix<double, ZC ? ZC : Eigen::Dynamic, 1>;
template <int ZC>
using ZMat = Eigen::Matrix<double, ZC ? ZC : Eigen::Dynamic, ZC ? ZC : Eigen::Dynamic, Eigen::RowMajor>;

}  // namespace

// Forward pass with scaling; leaves alpha_t (normalised) in alpha_ and c_t in scale_.
// ZC > 0 fixes the latent size at compile time; ZC = 0 is the general case.
template <int ZC>
double ForwardBackward::forward(const std::int32_t* o, const std::int32_t* a, int H, bool logged) {
  const int Z = ZC > 0 ? ZC : Z_;
  const bool w = logged && has_decision_;
  double* al = alpha_.data();
  double c = 0.0;
  for (int z = 0; z < Z; ++z) {
    double v = q0_[z] * qE_[z * O_ + o[0]];
    if (w && H > 0) v *= qA_[z * A_ + a[0]];
    al[z] = v;
    c += v;
  }
  // log p = sum_t log c_t, taken as the log of a running product (one log per episode unless the
  // product nears the bottom of the double range).
  double ll = 0.0, product = c;
  scale_[0] = c;
  for (int z = 0; z < Z; ++z) al[z] /= c;
  for (int t = 0; t < H; ++t) {
    Eigen::Map<const ZVec<ZC>> prev(al + static_cast<std::ptrdiff_t>(t) * Z, Z);
    Eigen::Map<ZVec<ZC>> cur(al + static_cast<std::ptrdiff_t>(t + 1) * Z, Z);
    Eigen::Map<const ZMat<ZC>> M(M_.data() + (static_cast<std::size_t>(a[t]) * O_ + o[t + 1]) * Z * Z, Z, Z);
    cur.noalias() = M.transpose().lazyProduct(prev);  // cur(z') = sum_z prev(z) M(z, z')
    if (w && t + 1 < H) {
      Eigen::Map<const ZVec<ZC>, 0, Eigen::InnerStride<>> qa(qA_.data() + a[t + 1], Z, Eigen::InnerStride<>(A_));
      cur.array() *= qa.array();
    }
    c = cur.sum();
    scale_[static_cast<std::size_t>(t + 1)] = c;
    product *= c;
    if (product < 1e-250) {
      ll += std::log(product);
      product = 1.0;
    }
    cur *= 1.0 / c;
  }
  return ll + std::log(product);
}

// Backward pass and expected counts. With v(z') = w_{t+1}(z') beta_{t+1}(z') / c_{t+1}:
//   beta_t = M v  and  xi_t(z, z') = alpha_t(z) M(z, z') v(z'), so we accumulate the outer
//   product alpha_t v^T per (a_t, o_{t+1}) and multiply by M once per E-step (see accumulate()).
template <int ZC>
void ForwardBackward::backward_and_count(const std::int32_t* o, const std::int32_t* a, int H, bool logged,
                                         ExpectedCounts& c) {
  const int Z = ZC > 0 ? ZC : Z_;
  const bool w = logged && has_decision_;
  const double* al = alpha_.data();
  Eigen::Map<ZVec<ZC>> beta(beta_.data(), Z);
  Eigen::Map<ZVec<ZC>> v(next_.data(), Z);
  beta.setOnes();
  // gamma_t is accumulated into transposed buffers, contiguous in z (gamma_E_[o][z],
  // gamma_A_[a][z]); accumulate() folds them into the counts once per call.
  // gamma_H = alpha_H
  Eigen::Map<ZVec<ZC>>(gamma_E_.data() + static_cast<std::ptrdiff_t>(o[H]) * Z, Z) +=
      Eigen::Map<const ZVec<ZC>>(al + static_cast<std::ptrdiff_t>(H) * Z, Z);
  for (int t = H - 1; t >= 0; --t) {
    const double inv = 1.0 / scale_[static_cast<std::size_t>(t + 1)];
    if (w && t + 1 < H) {
      Eigen::Map<const ZVec<ZC>, 0, Eigen::InnerStride<>> qa(qA_.data() + a[t + 1], Z, Eigen::InnerStride<>(A_));
      v = (qa.array() * beta.array() * inv).matrix();
    } else {
      v = beta * inv;
    }
    const std::size_t block = (static_cast<std::size_t>(a[t]) * O_ + o[t + 1]) * Z * Z;
    Eigen::Map<const ZMat<ZC>> M(M_.data() + block, Z, Z);
    Eigen::Map<ZMat<ZC>> X(outer_.data() + block, Z, Z);
    Eigen::Map<const ZVec<ZC>> at(al + static_cast<std::ptrdiff_t>(t) * Z, Z);
    beta.noalias() = M.lazyProduct(v);  // beta_t
    X.noalias() += at * v.transpose();  // X += alpha_t v^T
    // gamma_t(z) = alpha_t(z) beta_t(z)
    Eigen::Map<ZVec<ZC>> g(tmp_.data(), Z);
    g = at.cwiseProduct(beta);
    Eigen::Map<ZVec<ZC>>(gamma_E_.data() + static_cast<std::ptrdiff_t>(o[t]) * Z, Z) += g;
    if (w) Eigen::Map<ZVec<ZC>>(gamma_A_.data() + static_cast<std::ptrdiff_t>(a[t]) * Z, Z) += g;
    if (t == 0) c.initial += g;
  }
  if (H == 0) c.initial += Eigen::Map<const ZVec<ZC>>(al, Z);  // gamma_0 = alpha_0
}

template <int ZC>
double ForwardBackward::run_episodes(const Dataset& d, int count, bool logged, ExpectedCounts& counts) {
  double ll = 0.0;
  for (int i = 0; i < count; ++i) {
    ll += forward<ZC>(d.obs(i), d.act(i), d.length(i), logged);
    backward_and_count<ZC>(d.obs(i), d.act(i), d.length(i), logged, counts);
  }
  return ll;
}

double ForwardBackward::accumulate(const DataView& view, ExpectedCounts& counts) {
  if (view.count == 0) return 0.0;
  const Dataset& d = *view.data;
  const bool logged = view.regime == Regime::logged;
  std::fill(outer_.begin(), outer_.end(), 0.0);
  std::fill(gamma_E_.begin(), gamma_E_.end(), 0.0);
  std::fill(gamma_A_.begin(), gamma_A_.end(), 0.0);
  double ll = 0.0;
  switch (Z_) {
    case 1: ll = run_episodes<1>(d, view.count, logged, counts); break;
    case 2: ll = run_episodes<2>(d, view.count, logged, counts); break;
    case 3: ll = run_episodes<3>(d, view.count, logged, counts); break;
    case 4: ll = run_episodes<4>(d, view.count, logged, counts); break;
    case 5: ll = run_episodes<5>(d, view.count, logged, counts); break;
    case 6: ll = run_episodes<6>(d, view.count, logged, counts); break;
    case 8: ll = run_episodes<8>(d, view.count, logged, counts); break;
    default: ll = run_episodes<0>(d, view.count, logged, counts); break;
  }
  // N_T[a](z, z') += sum_o M[a][o](z, z') X[a][o](z, z')
  const std::size_t ZZ = static_cast<std::size_t>(Z_) * Z_;
  for (int a = 0; a < A_; ++a) {
    double* N = counts.transitions[static_cast<std::size_t>(a)].data();
    for (int o = 0; o < O_; ++o) {
      const double* M = M_.data() + (static_cast<std::size_t>(a) * O_ + o) * ZZ;
      const double* X = outer_.data() + (static_cast<std::size_t>(a) * O_ + o) * ZZ;
      for (std::size_t k = 0; k < ZZ; ++k) N[k] += M[k] * X[k];
    }
  }
  for (int z = 0; z < Z_; ++z) {
    for (int o = 0; o < O_; ++o) counts.emissions(z, o) += gamma_E_[static_cast<std::size_t>(o) * Z_ + z];
    for (int a = 0; a < A_; ++a) counts.decision(z, a) += gamma_A_[static_cast<std::size_t>(a) * Z_ + z];
  }
  counts.loglik += ll;
  return ll;
}

double ForwardBackward::log_likelihood(const DataView& view) {
  const Dataset& d = *view.data;
  double ll = 0.0;
  for (int i = 0; i < view.count; ++i) ll += forward<0>(d.obs(i), d.act(i), d.length(i), view.regime == Regime::logged);
  return ll;
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
