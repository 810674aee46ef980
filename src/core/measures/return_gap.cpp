// The return_gap measure; see return_gap.hpp.
#include "core/measures/return_gap.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <stdexcept>
#include <vector>

#include "core/measures/plan_value.hpp"

namespace dobudget {

namespace {
constexpr const char* kNoRoom = "no room for planning";
}

double room_threshold(double v_star, double v_star_se) {
  return std::max(1e-6 * (1.0 + std::abs(v_star)), 2.0 * v_star_se);
}

std::optional<double> normalised_gap(double v_star, double v_uniform, double v, double v_star_se) {
  const double den = v_star - v_uniform;
  if (!std::isfinite(den) || !(den >= room_threshold(v_star, v_star_se))) return std::nullopt;
  return (v_star - v) / den;
}

ReturnGapReference prepare_return_gap(const Pomdp& truth, const PlannerSettings& settings, const StreamKey& key,
                                      const StopToken& stop) {
  StreamKey k0 = key;
  k0.replicate = 0;
  ReturnGapReference ref;
  ref.true_plan = plan(truth, settings, k0, stop);
  const PolicyValue v = plan_value(truth, truth, ref.true_plan, settings, k0, stop);
  ref.v_star = v.mean;
  ref.v_star_se = v.standard_error;
  ref.v_star_exact = v.exact;
  ref.v_uniform = exact_uniform_value(truth);
  ref.room = normalised_gap(ref.v_star, ref.v_uniform, ref.v_star, ref.v_star_se).has_value();
  if (!ref.room) ref.note = kNoRoom;
  return ref;
}

std::vector<double> true_plan_returns(const Pomdp& truth, const ReturnGapReference& ref, const PlannerSettings& settings,
                                      const StreamKey& replicate_key, const StopToken& stop) {
  std::vector<double> r;
  if (ref.room && !ref.v_star_exact)
    rollout_plan_value(truth, truth, ref.true_plan, settings.rollouts, replicate_key, &r, stop);
  return r;
}

ReturnGapResult return_gap(const Pomdp& truth, const Pomdp& fitted, const ReturnGapReference& ref,
                           const PlannerSettings& settings, const StreamKey& replicate_key,
                           const std::vector<double>* star_returns, const StopToken& stop) {
  if (ref.true_plan.states != truth.states || ref.true_plan.horizon != truth.horizon)
    throw std::invalid_argument("return_gap: the reference was not prepared for this truth");
  if (fitted.horizon != truth.horizon || fitted.discount != truth.discount)
    throw std::invalid_argument("return_gap: the fitted model must carry the truth's horizon and discount");
  if (fitted.actions != truth.actions || fitted.observations != truth.observations)
    throw std::invalid_argument("return_gap: the fitted model must share the truth's actions and observations");
  ReturnGapResult out;
  out.v_star = ref.v_star;
  if (!ref.room) {
    out.value = std::numeric_limits<double>::quiet_NaN();
    out.note = kNoRoom;
    return out;
  }
  const double den = ref.v_star - ref.v_uniform;
  const Plan fitted_plan = plan(fitted, settings, replicate_key, stop);
  check_compatible(truth, fitted, fitted_plan);

  if (ref.v_star_exact) {
    if (auto v = exact_plan_value(truth, fitted, fitted_plan, settings.exact_histories, stop)) {
      out.value = v->mean;
      out.exact = true;
      out.gap = (ref.v_star - v->mean) / den;
      return out;
    }
  }
  // Rollouts for both plans, common random numbers from the replicate's rollout stream.
  // The true plan's returns are the same for every fit of a replicate: computed once when given.
  std::vector<double> own_star;
  if (star_returns == nullptr || static_cast<int>(star_returns->size()) != settings.rollouts) {
    own_star = true_plan_returns(truth, ref, settings, replicate_key, stop);
    if (own_star.empty())
      rollout_plan_value(truth, truth, ref.true_plan, settings.rollouts, replicate_key, &own_star, stop);
    star_returns = &own_star;
  }
  const std::vector<double>& r_star = *star_returns;
  std::vector<double> r_hat;
  const PolicyValue vh = rollout_plan_value(truth, fitted, fitted_plan, settings.rollouts, replicate_key, &r_hat, stop);
  const int n = settings.rollouts;
  double mean = 0.0;
  for (int i = 0; i < n; ++i) mean += r_star[i] - r_hat[i];
  mean /= n;
  double ss = 0.0;
  for (int i = 0; i < n; ++i) {
    const double d = r_star[i] - r_hat[i] - mean;
    ss += d * d;
  }
  double star_mean = 0.0;
  for (int i = 0; i < n; ++i) star_mean += r_star[i];
  out.v_star = star_mean / n;
  out.value = vh.mean;
  out.value_se = vh.standard_error;
  out.gap = mean / den;
  out.gap_se = std::sqrt(ss / (n - 1) / n) / den;
  return out;
}

}  // namespace dobudget
