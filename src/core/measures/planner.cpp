// Finite-horizon point-based value iteration; see planner.hpp for the equations and reference
// (Pineau, Gordon and Thrun, IJCAI 2003).
#include "core/measures/planner.hpp"

#include <algorithm>
#include <boost/random/uniform_01.hpp>
#include <cmath>
#include <limits>
#include <stdexcept>

#include "core/measures/belief.hpp"
#include "core/world/sampling.hpp"

namespace dobudget {
namespace {

constexpr double kBeliefTolerance = 1e-9;  // L1 distance under which two belief points are one
constexpr double kAlphaTolerance = 1e-12;  // relative max-abs difference under which two alphas are one
constexpr double kTieTolerance = 1e-12;    // relative: values this close to the best are ties

// Belief points of one stage, row-major (count x states) in `data`.
struct PointSet {
  std::vector<double> data;
  int count = 0;
  bool complete = false;
};

// True when some stored point is within kBeliefTolerance (L1) of b. Early exit per point.
bool contains(const PointSet& set, const double* b, int n) {
  for (int i = 0; i < set.count; ++i) {
    const double* p = set.data.data() + static_cast<std::ptrdiff_t>(i) * n;
    double d = 0.0;
    int s = 0;
    for (; s < n; ++s) {
      d += std::abs(p[s] - b[s]);
      if (d > kBeliefTolerance) break;
    }
    if (s == n) return true;
  }
  return false;
}

void append(PointSet& set, const double* b, int n) {
  set.data.insert(set.data.end(), b, b + n);
  ++set.count;
}


// Buffers for the backups, sized once per plan() call (capacity: points x alphas).
struct Workspace {
  int S = 0, A = 0, O = 0;
  double gamma = 1.0;
  std::vector<std::vector<int>> support;  // support[o] = { s' : E(s', o) > 0 }
  Matrix Pa;      // points x S: predicted beliefs b T[a]
  Matrix PO;      // points x O: P(o | b, a)
  Matrix X;       // points x S: gathered (b T[a]) o E(:, o) on rows with P(o | b, a) > 0
  Matrix GT;      // S x alphas: gathered next-stage alphas, transposed, on support[o]
  Matrix Y;       // points x alphas: b . g_{a,o}^k
  Matrix score;   // points x A: b . alpha_a
  std::vector<int> rows;   // rows with P(o | b, a) > 0
  std::vector<int> kstar;  // points x A x O: k*(a, o) per point
  Matrix cand;             // points x S: backed-up alpha per point
  std::vector<int> cand_action;
  std::vector<int> keep;
  Vector h;

  explicit Workspace(const Pomdp& m)
      : S(m.states), A(m.actions), O(m.observations), gamma(m.discount), support(m.observations) {
    for (int o = 0; o < O; ++o)
      for (int s = 0; s < S; ++s)
        if (m.emissions(s, o) > 0.0) support[o].push_back(s);
    h.resize(S);
  }

  // Sizes the buffers for `points` belief points and `alphas` next-stage alphas (grows only).
  void reserve(int points, int alphas) {
    if (points > Pa.rows()) {
      Pa.resize(points, S);
      PO.resize(points, O);
      X.resize(points, S);
      score.resize(points, A);
      rows.resize(points);
      kstar.resize(static_cast<std::size_t>(points) * A * O);
      cand.resize(points, S);
      cand_action.resize(points);
      keep.reserve(points);
    }
    if (points > Y.rows() || alphas > Y.cols()) Y.resize(std::max<Eigen::Index>(points, Y.rows()), std::max<Eigen::Index>(alphas, Y.cols()));
    if (alphas > GT.cols()) GT.resize(S, alphas);
  }
};

// Point-based backup of the n points in `pts` against the next stage's alphas `next`
// (Kn x S; a single zero row for t = H-1). Writes the pruned set into out_alpha / out_action.
void backup_stage(const Pomdp& m, const PointSet& pts, const Matrix& next, Workspace& w, Matrix& out_alpha,
                  std::vector<int>& out_action, const StopToken& stop) {
  const int S = w.S, A = w.A, O = w.O, n = pts.count;
  const int Kn = static_cast<int>(next.rows());
  const Eigen::Map<const Matrix> B(pts.data.data(), n, S);
  const Vector& r = m.rewards;

  for (int a = 0; a < A; ++a) {
    stop.poll();
    auto Pa = w.Pa.topRows(n);
    auto PO = w.PO.topRows(n);
    Pa.noalias() = B * m.transitions[a];
    PO.noalias() = Pa * m.emissions;
    for (int i = 0; i < n; ++i) w.score(i, a) = PO.row(i).dot(r);
    for (int o = 0; o < O; ++o) {
      const std::vector<int>& C = w.support[o];
      const int c = static_cast<int>(C.size());
      int nr = 0;
      for (int i = 0; i < n; ++i) {
        w.kstar[(static_cast<std::size_t>(i) * A + a) * O + o] = 0;  // arbitrary (lowest) when P(o | b, a) = 0
        if (PO(i, o) > 0.0) w.rows[nr++] = i;
      }
      if (nr == 0 || c == 0) continue;
      // X = ((b T[a]) o E(:, o)) restricted to rows with P(o | b, a) > 0 and to support[o].
      for (int q = 0; q < nr; ++q) {
        const int i = w.rows[q];
        for (int j = 0; j < c; ++j) w.X(q, j) = Pa(i, C[j]) * m.emissions(C[j], o);
      }
      auto Y = w.Y.topLeftCorner(nr, Kn);
      if (c == S) {
        Y.noalias() = w.X.topLeftCorner(nr, S) * next.transpose();
      } else {
        for (int j = 0; j < c; ++j)
          for (int k = 0; k < Kn; ++k) w.GT(j, k) = next(k, C[j]);
        Y.noalias() = w.X.topLeftCorner(nr, c) * w.GT.topLeftCorner(c, Kn);
      }
      // k*(a, o) = argmax_k b . g_{a,o}^k, ties -> lowest k.
      for (int q = 0; q < nr; ++q) {
        const double* y = w.Y.data() + static_cast<std::ptrdiff_t>(q) * w.Y.cols();
        int best = 0;
        for (int k = 1; k < Kn; ++k)
          if (y[k] > y[best]) best = k;
        const int i = w.rows[q];
        w.kstar[(static_cast<std::size_t>(i) * A + a) * O + o] = best;
        w.score(i, a) += w.gamma * y[best];
      }
    }
  }

  // Best action per point (ties -> lowest action), then its alpha vector:
  // alpha(s) = sum_{s'} T[a](s, s') h(s'),  h(s') = sum_o E(s', o) [ r(o) + gamma alpha_{k*(a,o)}(s') ].
  for (int i = 0; i < n; ++i) {
    double best = w.score(i, 0);
    for (int a = 1; a < A; ++a) best = std::max(best, w.score(i, a));
    const double thr = best - kTieTolerance * (1.0 + std::abs(best));
    int act = 0;
    while (w.score(i, act) < thr) ++act;
    const int* ks = w.kstar.data() + (static_cast<std::size_t>(i) * A + act) * O;
    for (int s = 0; s < S; ++s) {
      double hs = 0.0;
      for (int o = 0; o < O; ++o) {
        const double e = m.emissions(s, o);
        if (e != 0.0) hs += e * (r(o) + w.gamma * next(ks[o], s));
      }
      w.h(s) = hs;
    }
    const Matrix& T = m.transitions[act];
    for (int s = 0; s < S; ++s) {
      const double* row = T.data() + static_cast<std::ptrdiff_t>(s) * S;
      double v = 0.0;
      for (int j = 0; j < S; ++j) v += row[j] * w.h(j);
      w.cand(i, s) = v;
    }
    w.cand_action[i] = act;
  }

  // Prune duplicates (same action, entries equal within kAlphaTolerance relative); keep first.
  w.keep.clear();
  for (int i = 0; i < n; ++i) {
    const double* ci = w.cand.data() + static_cast<std::ptrdiff_t>(i) * S;
    bool dup = false;
    for (int k : w.keep) {
      if (w.cand_action[k] != w.cand_action[i]) continue;
      const double* ck = w.cand.data() + static_cast<std::ptrdiff_t>(k) * S;
      int s = 0;
      for (; s < S; ++s)
        if (std::abs(ci[s] - ck[s]) > kAlphaTolerance * (1.0 + std::abs(ck[s]))) break;
      if (s == S) {
        dup = true;
        break;
      }
    }
    if (!dup) w.keep.push_back(i);
  }
  const int K = static_cast<int>(w.keep.size());
  out_alpha.resize(K, S);
  out_action.resize(K);
  for (int k = 0; k < K; ++k) {
    out_alpha.row(k) = w.cand.row(w.keep[k]);
    out_action[k] = w.cand_action[w.keep[k]];
  }
}

// Backs up every stage from H-1 down to 0.
void backup_all(const Pomdp& m, const std::vector<PointSet>& sets, Workspace& w, Plan& p, const StopToken& stop) {
  const int H = m.horizon;
  const Matrix zero = Matrix::Zero(1, m.states);  // V_H = 0
  int most = 1;
  for (const PointSet& s : sets) most = std::max(most, s.count);
  w.reserve(most, most);  // a stage has at most as many alphas as points
  for (int t = H - 1; t >= 0; --t) {
    const Matrix& next = (t == H - 1) ? zero : p.alpha[t + 1];
    backup_stage(m, sets[t], next, w, p.alpha[t], p.action[t], stop);
    p.belief_points[t] = sets[t].count;
    p.complete[t] = sets[t].complete ? 1 : 0;
  }
}

enum class Rule { uniform, greedy };

// Forward simulation in the model: adds newly met beliefs to every incomplete stage holding fewer
// than `target` points. Stops when all such stages are full, after `stall` consecutive
// trajectories that added nothing, or after `cap` trajectories. Returns true when all are full.
bool simulate(const Pomdp& m, const Plan* greedy, Rule rule, int target, std::vector<PointSet>& sets, Engine& eng,
              std::vector<double>& buf, const StopToken& stop) {
  const int S = m.states, A = m.actions, O = m.observations, H = m.horizon;
  auto full = [&] {
    for (const PointSet& s : sets)
      if (!s.complete && s.count < target) return false;
    return true;
  };
  double* b = buf.data();
  double* nb = b + S;
  double* po = nb + S;
  boost::random::uniform_01<double> U;
  const int stall_limit = 200;
  const long cap = 10L * target + 1000;
  int stall = 0;
  for (long traj = 0; traj < cap && stall < stall_limit; ++traj) {
    stop.poll();
    if (full()) return true;
    bool added = false;
    // o_0 ~ P(o_0), b_0 = p0 | o_0.
    observation_distribution(m, m.initial.data(), po);
    const int o0 = categorical_from_uniform(U(eng), po, O);
    for (int s = 0; s < S; ++s) b[s] = m.initial(s);
    condition(m, b, o0);
    for (int t = 0; t < H; ++t) {
      PointSet& set = sets[t];
      if (!set.complete && set.count < target && !contains(set, b, S)) {
        append(set, b, S);
        added = true;
      }
      if (t == H - 1) break;
      const double u = U(eng);  // drawn whatever the rule, so the stream stays aligned
      const int a = rule == Rule::greedy ? choose_action(*greedy, t, b) : std::min(A - 1, static_cast<int>(u * A));
      predict(m, b, a, nb);
      observation_distribution(m, nb, po);
      const int o = categorical_from_uniform(U(eng), po, O);
      if (condition(m, nb, o) <= 0.0) break;  // cannot happen for o drawn from po; defensive
      std::swap(b, nb);
    }
    stall = added ? 0 : stall + 1;
  }
  return full();
}

}  // namespace

Plan plan(const Pomdp& model, const PlannerSettings& settings, const StreamKey& key, const StopToken& stop) {
  if (model.horizon < 1) throw std::invalid_argument("plan: horizon must be at least 1");
  if (settings.belief_points < 1) throw std::invalid_argument("plan: belief_points must be at least 1");
  if (auto e = validate(model, 1e-6); !e.empty()) throw std::invalid_argument("plan: " + e);
  // |V_t(b)| <= (H - t) max_o |r(o)| (discount <= 1, probabilities): finite when H max |r| is. An
  // infinite alpha entry meets a zero belief entry in b . alpha and gives NaN, which compares with
  // nothing (found with rewards of 1e308: the plan's choices were no action at all).
  const double most = model.rewards.size() > 0 ? model.rewards.cwiseAbs().maxCoeff() : 0.0;
  if (!std::isfinite(most) || !std::isfinite(most * model.horizon))
    throw std::invalid_argument("plan: the rewards must be finite and horizon x max |reward| must not overflow");
  const int S = model.states, A = model.actions, O = model.observations, H = model.horizon;
  const int N = settings.belief_points;

  std::vector<PointSet> sets(static_cast<std::size_t>(H));
  std::vector<double> buf(static_cast<std::size_t>(2 * S + O));
  double* p = buf.data();
  double* q = p + S;
  double* po = q + S;

  // 1. Stage 0: p0 | o_0 for every o_0 of positive probability (the N most probable if more).
  {
    observation_distribution(model, model.initial.data(), po);
    std::vector<int> order;
    for (int o = 0; o < O; ++o)
      if (po[o] > 0.0) order.push_back(o);
    std::stable_sort(order.begin(), order.end(), [&](int x, int y) { return po[x] > po[y]; });
    sets[0].complete = static_cast<int>(order.size()) <= N;
    for (int o : order) {
      if (sets[0].count >= N) break;
      for (int s = 0; s < S; ++s) p[s] = model.initial(s);
      condition(model, p, o);
      if (!contains(sets[0], p, S)) append(sets[0], p, S);
    }
  }

  // 2. Exhaustive expansion while the successors fit the budget.
  int t_done = 0;  // stages 0..t_done are complete
  for (int t = 0; t + 1 < H && sets[t].complete; ++t) {
    PointSet& next = sets[t + 1];
    bool fits = true;
    for (int i = 0; i < sets[t].count && fits; ++i) {
      if (i % 64 == 0) stop.poll();
      const double* b = sets[t].data.data() + static_cast<std::ptrdiff_t>(i) * S;
      for (int a = 0; a < A && fits; ++a) {
        predict(model, b, a, q);
        observation_distribution(model, q, po);
        for (int o = 0; o < O; ++o) {
          if (po[o] <= 0.0) continue;
          for (int s = 0; s < S; ++s) p[s] = q[s];
          if (condition(model, p, o) <= 0.0) continue;
          if (contains(next, p, S)) continue;
          if (next.count >= N) {
            fits = false;
            break;
          }
          append(next, p, S);
        }
      }
    }
    if (!fits) {
      next.data.clear();
      next.count = 0;
      break;
    }
    next.complete = true;
    t_done = t + 1;
  }

  Plan out;
  out.horizon = H;
  out.states = S;
  out.actions = A;
  out.alpha.resize(static_cast<std::size_t>(H));
  out.action.resize(static_cast<std::size_t>(H));
  out.belief_points.assign(static_cast<std::size_t>(H), 0);
  out.complete.assign(static_cast<std::size_t>(H), 0);

  if (t_done == H - 1 && sets[0].complete) {
    Workspace w(model);
    backup_all(model, sets, w, out, stop);
    return out;
  }

  // 3. Forward simulation: uniform actions to half the budget, back up, greedy to the full budget.
  Engine eng = make_engine(key, Purpose::planner, settings.seed);
  std::vector<double> sim(static_cast<std::size_t>(2 * S + O));
  Workspace w(model);
  simulate(model, nullptr, Rule::uniform, (N + 1) / 2, sets, eng, sim, stop);
  backup_all(model, sets, w, out, stop);
  if (N > 1) {
    if (!simulate(model, &out, Rule::greedy, N, sets, eng, sim, stop))
      simulate(model, nullptr, Rule::uniform, N, sets, eng, sim, stop);
    backup_all(model, sets, w, out, stop);
  }
  return out;
}

namespace {
// alpha[t] * b into a per-thread scratch vector (grows to the largest stage, then never allocates).
const double* stage_values(const Plan& p, int t, const double* belief) {
  thread_local Vector scratch;
  const Matrix& al = p.alpha[static_cast<std::size_t>(t)];
  if (scratch.size() < al.rows()) scratch.resize(al.rows());
  scratch.head(al.rows()).noalias() = al * Eigen::Map<const Vector>(belief, p.states);
  return scratch.data();
}
}  // namespace

int choose_action(const Plan& p, int t, const double* belief) {
  const double* v = stage_values(p, t, belief);
  const int K = static_cast<int>(p.alpha[static_cast<std::size_t>(t)].rows());
  double best = -std::numeric_limits<double>::infinity();
  for (int k = 0; k < K; ++k) best = std::max(best, v[k]);
  const double thr = best - kTieTolerance * (1.0 + std::abs(best));
  int act = std::numeric_limits<int>::max();
  const std::vector<int>& acts = p.action[static_cast<std::size_t>(t)];
  for (int k = 0; k < K; ++k)
    if (v[k] >= thr && acts[k] < act) act = acts[k];
  return act == std::numeric_limits<int>::max() ? 0 : act;  // NaN values compare with nothing
}

double value(const Plan& p, int t, const double* belief) {
  if (t >= p.horizon) return 0.0;
  const double* v = stage_values(p, t, belief);
  const int K = static_cast<int>(p.alpha[static_cast<std::size_t>(t)].rows());
  double best = -std::numeric_limits<double>::infinity();
  for (int k = 0; k < K; ++k) best = std::max(best, v[k]);
  return best;
}

double initial_value(const Plan& p, const Pomdp& m) {
  std::vector<double> po(static_cast<std::size_t>(m.observations)), b(static_cast<std::size_t>(m.states));
  observation_distribution(m, m.initial.data(), po.data());
  double v = 0.0;
  for (int o = 0; o < m.observations; ++o) {
    if (po[o] <= 0.0) continue;
    for (int s = 0; s < m.states; ++s) b[s] = m.initial(s);
    condition(m, b.data(), o);
    v += po[o] * value(p, 0, b.data());
  }
  return v;
}

}  // namespace dobudget
