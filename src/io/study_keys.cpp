#include "io/study_keys.hpp"

namespace dobudget::io {

namespace {
using K = SweepKind;
}  // namespace

// One row per key. The allowed texts state the limits checked in study_file.cpp ("Limits") and
// model_file.hpp (max_model_size = 200).
const std::vector<StudyKey>& study_keys() {
  static const std::vector<StudyKey> table{
      // path, type, default, allowed, sweep, meaning
      {"name", "text", "example", "non-empty, at most 200 bytes, UTF-8, no control characters", K::none,
       "the study's name: shown (escaped) in tables and pages; the default run directory is `runs/` plus a safe form "
       "of it"},
      {"seed", "whole number", "1", "0 .. 2^64-1", K::none,
       "the root of every random stream of the study: the same seed gives the same runs.csv"},

      {"environment", "section", "the synthetic family", "a mapping of the keys below", K::none,
       "the environments: drawn from the synthetic family, or one given model (`file` or `model`)"},
      {"environment.states", "whole number", "4", "1 .. 200", K::whole,
       "hidden states of each synthetic environment"},
      {"environment.actions", "whole number", "2", "1 .. 200", K::whole, "actions of each synthetic environment"},
      {"environment.observations", "whole number", "3", "1 .. 200", K::whole,
       "observation symbols of each synthetic environment (each has a reward)"},
      {"environment.horizon", "whole number", "8", "1 .. 10^4", K::whole, "steps per episode (H)"},
      {"environment.discount", "number", "1", "in (0, 1]", K::number,
       "discount of rewards in the return (planning and the return gap)"},
      {"environment.draws", "whole number", "4", "1 .. 10^5; exactly 1 with a given model; default 16 with `data`", K::whole,
       "synthetic environments drawn per scenario (the worlds the answer rests on)"},
      {"environment.dynamics_concentration", "number", "0.5", "greater than 0", K::number,
       "Dirichlet concentration of each transition row: small values give sharp (nearly deterministic) dynamics"},
      {"environment.observation_noise", "number", "0.3", "in [0, 1]", K::number,
       "weight of the random (Dirichlet(1)) part of each emission row; the rest shows the state's own symbol"},
      {"environment.file", "text (path)", "none", "a readable model file, relative to the study file's folder",
       K::none, "a given environment, read from a model file ([model-file.md](model-file.md)); excludes the family keys"},
      {"environment.model", "mapping", "none", "a model in the model-file format", K::none,
       "a given environment written inline (the form `study.resolved.yaml` uses); excludes `file` and the family "
       "keys"},

      {"environment.data", "text (path)", "none", "a readable episodes file (CSV), relative to the study file's folder",
       K::none,
       "plan from the team's records: each draw is a plausible world sampled from the regime-aware fit of these "
       "episodes; excludes `file`, `model` and the family keys"},
      {"environment.codebook", "text (path)", "none", "a readable codebook (YAML); only with `data`", K::none,
       "the order of the observation and action codes and a reward per observation code"},
      {"environment.latent_states", "whole number or auto", "auto", "auto, or 1 .. 200; only with `data`", K::none,
       "latent size of the fit to the records; auto chooses it by held-out log-likelihood over episode folds"},
      {"environment.prior_concentration", "number", "1", "in (0, 1e100]; only with `data`", K::number,
       "Dirichlet concentration added to the records' expected counts when plausible worlds are drawn: how widely "
       "the worlds differ where the records are silent"},
      {"environment.records", "mapping", "none", "written by dobudget in study.resolved.yaml; only with `data`",
       K::none, "facts of the records (digest, counts, sizes) that tie a run to the files it was planned from"},

      {"logging", "section", "", "a mapping of the keys below", K::none,
       "the logged regime: how the decision-makers who saw the hidden state chose actions"},
      {"logging.privilege", "number", "0.9", "in [0, 1]", K::number,
       "weight of the state-aware softmax in the logging policy; the rest is uniform (0: unconfounded logs)"},
      {"logging.temperature", "number", "0.2", "greater than 0", K::number,
       "temperature of the loggers' softmax over Q(s, .): small values choose the best action"},
      {"logging.q_discount", "number", "0.9", "in [0, 1)", K::number,
       "discount of the fully observed Q that the loggers rank actions by"},

      {"pilot", "section", "", "a mapping of the keys below", K::none, "the pilot regime"},
      {"pilot.policy", "text, or a list of texts", "uniform", "uniform, usual-practice, complement, targeted; a list "
       "compares them (a paired sweep axis)", K::text,
       "how pilot actions are chosen from the recorded history only (never the hidden state)"},
      {"pilot.explore", "number", "0.2", "in [0, 1]", K::number,
       "usual-practice: the share of uniformly random actions; the rest follows the loggers' action frequencies "
       "after the same recorded observation"},
      {"pilot.floor", "number", "0.2", "in [0, 1]", K::number,
       "complement and targeted: every action keeps at least floor / A probability"},

      {"budgets", "section", "", "a mapping of the keys below", K::none, "the grid of data sizes simulated"},
      {"budgets.logged", "list of whole numbers", "[0, 1000]", "1 to 100 budgets, strictly increasing, 0 .. 10^7",
       K::none, "logged episodes available (each is a column of the answer)"},
      {"budgets.pilot", "list of whole numbers, or a range {from, to}", "[10, 30, 100, 300, 1000]",
       "1 to 100 budgets, strictly increasing, 0 .. 10^7 (0 only with logged budgets above 0); or {from: a, to: b} "
       "with 1 <= a < b <= 10^7 (range mode)", K::none,
       "pilot episodes simulated; the answer interpolates between them. A range lets `plan` choose the budgets, "
       "draws and replicates in rounds until the answers meet `precision`"},
      {"budgets.pilot_rounds", "list of whole numbers", "none", "1 .. 20, one per listed pilot budget", K::none,
       "written by range mode into each round's study: the round in which each pilot budget was added (warm starts "
       "chain only within a round)"},

      {"replicates", "whole number", "10", "1 .. 10^5 (scenarios x draws x replicates at most 10^7)", K::whole,
       "independent data sets per environment draw"},
      {"strategies", "list of names", "[pilot-only, pooled, regime-aware]",
       "pilot-only, pooled, regime-aware; at least one, no repeats", K::none, "the ways of fitting compared"},
      {"measures", "list of names", "[model_kl]", "model_kl, return_gap; at least one, no repeats", K::none,
       "the errors computed for every fit"},

      {"fit", "section", "", "a mapping of the keys below", K::none, "expectation-maximisation of the latent model"},
      {"fit.latent_states", "whole number", "the environment's number of states", "1 .. 200", K::whole,
       "latent values Z of the fitted model"},
      {"fit.restarts", "whole number", "3", "1 .. 1000", K::whole,
       "starts that always run (warm starts included, at least one random), each to convergence"},
      {"fit.max_restarts", "whole number", "10", "1 .. 1000", K::whole,
       "starts at most while the best optimum is not reached by a second start"},
      {"fit.max_iterations", "whole number", "200", "1 .. 10^5", K::whole, "E-steps at most per start"},
      {"fit.tolerance", "number", "1e-06", "greater than 0", K::number,
       "convergence: gain of the objective per observation below which a start stops (with parameters moving at "
       "most 1e-3)"},
      {"fit.prior", "number", "0.1", "in [0, 1e100]", K::number,
       "symmetric Dirichlet pseudo-count added to every expected count (MAP estimate)"},

      {"evaluation", "section", "", "a mapping of the keys below", K::none, "how model_kl is estimated"},
      {"evaluation.trajectories", "whole number", "1000", "1 .. 10^7", K::whole,
       "evaluation histories (under the evaluation policy) over which model_kl is averaged"},
      {"evaluation.policy", "text", "uniform", "uniform", K::text, "the policy that generates evaluation histories"},

      {"planner", "section", "", "a mapping of the keys below", K::none, "planning, for return_gap"},
      {"planner.belief_points", "whole number", "500", "1 .. 10^4", K::whole,
       "belief points of point-based value iteration"},
      {"planner.seed", "whole number", "0", "0 .. 2^64-1", K::seed,
       "extra key folded into the planner's random stream"},
      {"planner.exact_histories", "whole number", "20000", "0 .. 10^9", K::whole,
       "a plan is evaluated exactly when it reaches at most this many observation sequences"},
      {"planner.rollouts", "whole number", "2000", "2 .. 10^7", K::whole,
       "rollouts per evaluated plan when exact evaluation is too large"},

      {"targets", "section", "{model_kl: 0.02} when model_kl is measured", "a mapping of the keys below", K::none,
       "the target of each measure the answer is computed for"},
      {"targets.model_kl", "number", "0.02", "greater than 0; only when model_kl is measured", K::number,
       "target model error, nats per observation (default only when `targets` is absent)"},
      {"targets.return_gap", "number", "none", "greater than 0; only when return_gap is measured", K::number,
       "target normalised return gap"},
      {"assurance", "number", "0.8", "in (0, 1)", K::number,
       "the fraction of (draw, replicate) pairs that must meet the target"},

      {"precision", "section", "none", "a mapping of the keys below; only with a range in budgets.pilot", K::none,
       "range mode: the precision every needed budget must reach, and the cost cap"},
      {"precision.relative", "number", "0.1", "in (0, 1)", K::none,
       "largest half-width of each needed budget's 90% interval, relative to the budget"},
      {"precision.max_core_hours", "number", "2", "in (0, 1e6]", K::none,
       "no round starts whose estimated cost (from counts) would take the total above this"},

      {"sweep", "mapping", "none", "sweepable key -> non-empty list of values (at most 10^4 scenarios)", K::none,
       "scenarios: the cartesian product of the lists, the last key varying fastest"},
  };
  return table;
}

const StudyKey* find_study_key(std::string_view path) {
  for (const StudyKey& k : study_keys())
    if (k.path == path) return &k;
  return nullptr;
}

std::vector<std::string> study_section_keys(std::string_view section) {
  std::vector<std::string> out;
  for (const StudyKey& k : study_keys()) {
    const std::size_t dot = k.path.rfind('.');
    const std::string_view parent = dot == std::string_view::npos ? std::string_view() : k.path.substr(0, dot);
    if (parent == section) out.emplace_back(dot == std::string_view::npos ? k.path : k.path.substr(dot + 1));
  }
  return out;
}

std::vector<std::pair<std::string, SweepKind>> sweepable_study_keys() {
  std::vector<std::pair<std::string, SweepKind>> out;
  for (const StudyKey& k : study_keys())
    if (k.sweep != SweepKind::none) out.emplace_back(std::string(k.path), k.sweep);
  return out;
}

}  // namespace dobudget::io
