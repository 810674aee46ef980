#include "core/fitting/model_selection.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numeric>

#include <boost/random/uniform_int_distribution.hpp>

#include "core/fitting/forward_backward.hpp"

namespace dobudget {

long long parameter_count(int Z, int A, int O, bool decision_rule) {
  const long long z = Z, a = A, o = O;
  return (z - 1) + a * z * (z - 1) + z * (o - 1) + (decision_rule ? z * (a - 1) : 0);
}

double bic(double loglik, long long parameters, double n) {
  return -2.0 * loglik + static_cast<double>(parameters) * std::log(n);
}

Dataset subset(const Dataset& d, const std::vector<int>& index) {
  Dataset s;
  s.horizon = d.horizon;
  s.count = static_cast<int>(index.size());
  const std::size_t H = static_cast<std::size_t>(d.horizon);
  s.observations.resize(index.size() * (H + 1));
  s.actions.resize(index.size() * H);
  if (!d.lengths.empty()) s.lengths.resize(index.size());
  for (std::size_t k = 0; k < index.size(); ++k) {
    const int i = index[k];
    std::copy(d.obs(i), d.obs(i) + H + 1, s.observations.begin() + static_cast<std::ptrdiff_t>(k * (H + 1)));
    std::copy(d.act(i), d.act(i) + H, s.actions.begin() + static_cast<std::ptrdiff_t>(k * H));
    if (!d.lengths.empty()) s.lengths[k] = d.lengths[static_cast<std::size_t>(i)];
  }
  return s;
}

namespace {

std::vector<DataView> views_of(const Dataset& logged, const Dataset& pilot) {
  std::vector<DataView> v;
  if (pilot.count > 0) v.push_back({&pilot, pilot.count, Regime::pilot});
  if (logged.count > 0) v.push_back({&logged, logged.count, Regime::logged});
  return v;
}

Engine fit_engine(std::uint64_t seed, int Z, int fold) {
  return make_engine(StreamKey{seed, 0, 0, 0}, Purpose::records_fit,
                     combine(static_cast<std::uint64_t>(Z), static_cast<std::uint64_t>(fold)));
}

// fold[i] of each episode of a dataset of n episodes: a seeded shuffle (Fisher-Yates) dealt
// round-robin from fold `start`, so folds differ in size by at most one (the pilot episodes are
// dealt on from where the logged ones stopped: with at least `folds` episodes every fold is
// non-empty, and so is every training set).
std::vector<int> fold_of(int n, int folds, int start, Engine& rng) {
  std::vector<int> order(static_cast<std::size_t>(n));
  std::iota(order.begin(), order.end(), 0);
  for (int i = n - 1; i > 0; --i) {
    boost::random::uniform_int_distribution<int> pick(0, i);
    std::swap(order[static_cast<std::size_t>(i)], order[static_cast<std::size_t>(pick(rng))]);
  }
  std::vector<int> fold(static_cast<std::size_t>(n));
  for (int k = 0; k < n; ++k) fold[static_cast<std::size_t>(order[static_cast<std::size_t>(k)])] = (start + k) % folds;
  return fold;
}

// Log-likelihood of each episode of `d` (regime `regime`) under model/decision, appended to `out`
// at the positions `where` (index of each episode in the overall per-episode vector).
void score_episodes(const Dataset& d, Regime regime, const Pomdp& model, const Matrix& decision,
                    const std::vector<int>& episodes, std::vector<double>& out, int offset) {
  if (episodes.empty()) return;
  ForwardBackward fb(model.states, model.actions, model.observations, std::max(1, d.horizon));
  fb.load(model, decision.size() > 0 ? &decision : nullptr);
  for (int i : episodes) {
    const Dataset one = subset(d, {i});
    out[static_cast<std::size_t>(offset + i)] = fb.log_likelihood(DataView{&one, 1, regime});
  }
}

}  // namespace

Selection select_latent_states(const Dataset& logged, const Dataset& pilot, const Pomdp& shape, const FitSettings& fs,
                               const SelectionSettings& sel, std::uint64_t seed, const StopToken& stop) {
  Selection out;
  out.decision_rule = logged.count > 0;
  out.episodes = logged.count + pilot.count;
  out.observations = logged.observations_in(logged.count) + pilot.observations_in(pilot.count);
  const std::vector<DataView> all = views_of(logged, pilot);

  const int folds = std::min(sel.folds, out.episodes);
  out.folds = folds >= 2 ? folds : 0;
  std::vector<int> logged_fold, pilot_fold;
  if (folds >= 2) {
    Engine rng = make_engine(StreamKey{seed, 0, 0, 0}, Purpose::records_fit, name_key("folds"));
    logged_fold = fold_of(logged.count, folds, 0, rng);
    pilot_fold = fold_of(pilot.count, folds, logged.count % folds, rng);
  }
  // Per-episode held-out log-likelihood of every size tried: pilot episodes first, then logged.
  std::vector<std::vector<double>> per_episode;

  int best = -1, since_best = 0;
  for (int Z : sel.sizes) {
    SizeFit s;
    s.latent_states = Z;
    FitSettings f = fs;
    f.latent_states = Z;
    Engine rng = fit_engine(seed, Z, 0);
    s.fit = fit(all, out.decision_rule, f, shape, rng, {}, stop);
    s.parameters = parameter_count(Z, shape.actions, shape.observations, out.decision_rule);
    s.bic = bic(s.fit.loglik, s.parameters, out.observations);
    if (folds >= 2) {
      std::vector<double> ll(static_cast<std::size_t>(out.episodes), 0.0);
      for (int k = 0; k < folds; ++k) {
        std::vector<int> train_l, test_l, train_p, test_p;
        for (int i = 0; i < logged.count; ++i) (logged_fold[static_cast<std::size_t>(i)] == k ? test_l : train_l).push_back(i);
        for (int i = 0; i < pilot.count; ++i) (pilot_fold[static_cast<std::size_t>(i)] == k ? test_p : train_p).push_back(i);
        const Dataset tl = subset(logged, train_l), tp = subset(pilot, train_p);
        Engine frng = fit_engine(seed, Z, k + 1);
        const FitResult r = fit(views_of(tl, tp), out.decision_rule, f, shape, frng, {}, stop);
        s.fold_fits_converged += r.converged;
        s.fold_fits_confirmed += r.confirmed;
        score_episodes(pilot, Regime::pilot, r.model, r.decision, test_p, ll, 0);
        score_episodes(logged, Regime::logged, r.model, r.decision, test_l, ll, pilot.count);
      }
      s.heldout = true;
      s.heldout_loglik = std::accumulate(ll.begin(), ll.end(), 0.0);
      per_episode.push_back(std::move(ll));
    }
    out.sizes.push_back(std::move(s));
    const int here = static_cast<int>(out.sizes.size()) - 1;
    const double score = folds >= 2 ? out.sizes.back().heldout_loglik : -out.sizes.back().bic;
    if (best < 0 || score > (folds >= 2 ? out.sizes[static_cast<std::size_t>(best)].heldout_loglik
                                         : -out.sizes[static_cast<std::size_t>(best)].bic)) {
      best = here;
      since_best = 0;
    } else if (sel.stop_early && ++since_best >= 2) {
      break;
    }
  }

  // The choice: without folds, the smallest BIC; with folds, the one-standard-error rule on the
  // paired held-out differences (header).
  out.chosen = best;
  if (folds >= 2) {
    const auto& b = per_episode[static_cast<std::size_t>(best)];
    const double n = static_cast<double>(b.size());
    for (std::size_t j = 0; j < out.sizes.size(); ++j) {
      double mean = 0.0;
      for (std::size_t i = 0; i < b.size(); ++i) mean += b[i] - per_episode[j][i];
      mean /= n;
      double var = 0.0;
      for (std::size_t i = 0; i < b.size(); ++i) {
        const double d = b[i] - per_episode[j][i] - mean;
        var += d * d;
      }
      var = n > 1 ? var / (n - 1) : 0.0;
      out.sizes[j].heldout_se = std::sqrt(n * var);
    }
    for (std::size_t j = 0; j < out.sizes.size(); ++j) {
      if (static_cast<int>(j) >= best) break;
      if (out.sizes[static_cast<std::size_t>(best)].heldout_loglik - out.sizes[j].heldout_loglik <= out.sizes[j].heldout_se) {
        out.chosen = static_cast<int>(j);
        break;
      }
    }
  }
  out.sizes[static_cast<std::size_t>(out.chosen)].chosen = true;
  return out;
}

}  // namespace dobudget
