// model_kl (docs/design.md, "model_kl"), in nats per observation:
//   1/(H+1) sum_{t=0..H} E_h[ KL( p(o_t | o_<t, do(a_<t)) || q(o_t | o_<t, do(a_<t)) ) ],
// with histories h drawn from the true environment under the evaluation policy and each
// predictive computed exactly by belief filtering in its own model (belief.hpp):
//   pred_0 = p0^T E,   pred_t = (b_{t-1}^T T[a_{t-1}]) E,   b_t = filter(b_{t-1}, a_{t-1}, o_t).
// The true predictives and their negative entropies are computed once per replicate
// (EvaluationSet) and shared by every strategy and budget (common random numbers). The sum is
// taken term by term, p (log p - log q), so that a perfect model gives exactly 0.
#pragma once
#include <vector>

#include "core/world/dataset.hpp"
#include "core/world/pomdp.hpp"
#include "core/running/stop.hpp"

namespace dobudget {

// Predictives p(o_t | history) of `model` along every episode of `histories`, t = 0..H, written
// to out[(i*(H+1) + t)*O + o]. Predictive over observations only: the actions are interventions.
// `stop` is polled every 256 histories (stop.hpp).
void predictives(const Pomdp& model, const Dataset& histories, std::vector<double>& out, const StopToken& stop = {});

struct EvaluationSet {
  Dataset histories;
  std::vector<double> truth;      // true predictives, layout as in predictives()
  std::vector<double> log_truth;  // log of each (0 where the probability is 0)
};

EvaluationSet make_evaluation_set(const Pomdp& truth, Dataset histories, const StopToken& stop = {});

// KL averaged over t and histories. +infinity if the model gives zero probability to an
// observation the truth can produce.
double model_kl(const EvaluationSet& eval, const Pomdp& fitted, const StopToken& stop = {});

}  // namespace dobudget
