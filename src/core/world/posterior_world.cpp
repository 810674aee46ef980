#include "core/world/posterior_world.hpp"

#include <vector>

#include "core/world/sampling.hpp"

namespace dobudget {
namespace {

// Row `out` ~ Dirichlet(counts + c).
template <class In, class Out>
void draw_row(Engine& rng, const In& counts, double c, Out&& out, std::vector<double>& alpha, std::vector<double>& x) {
  const auto k = static_cast<std::size_t>(counts.size());
  alpha.resize(k);
  x.resize(k);
  for (std::size_t j = 0; j < k; ++j) alpha[j] = counts(static_cast<Eigen::Index>(j)) + c;
  sample_dirichlet(rng, alpha.data(), static_cast<int>(k), x.data());
  for (std::size_t j = 0; j < k; ++j) out(static_cast<Eigen::Index>(j)) = x[j];
}

}  // namespace

Environment draw_plausible_world(const RecordsPosterior& p, double c, Engine& rng) {
  const Pomdp& f = p.fitted;
  const ExpectedCounts& N = p.counts;
  Environment env;
  Pomdp& m = env.model;
  m = f;
  std::vector<double> alpha, x;
  draw_row(rng, N.initial, c, m.initial, alpha, x);
  for (int a = 0; a < f.actions; ++a)
    for (int z = 0; z < f.states; ++z)
      draw_row(rng, N.transitions[static_cast<std::size_t>(a)].row(z), c,
               m.transitions[static_cast<std::size_t>(a)].row(z), alpha, x);
  for (int z = 0; z < f.states; ++z) draw_row(rng, N.emissions.row(z), c, m.emissions.row(z), alpha, x);
  env.logging_policy.resize(f.states, f.actions);
  for (int z = 0; z < f.states; ++z) {
    const Vector none = Vector::Zero(f.actions);
    if (p.decision.size() > 0) draw_row(rng, N.decision.row(z), c, env.logging_policy.row(z), alpha, x);
    else draw_row(rng, none, c, env.logging_policy.row(z), alpha, x);
  }
  return env;
}

}  // namespace dobudget
