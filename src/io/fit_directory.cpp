#include "io/fit_directory.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <vector>

#include "io/atomic_file.hpp"
#include "io/input_error.hpp"
#include "io/csv.hpp"
#include "io/csv_records.hpp"
#include "io/model_file.hpp"
#include "io/text_escape.hpp"

namespace dobudget::io {

RecordsFit fit_records(const EpisodeRecords& records, const FitSettings& fit, const SelectionSettings& selection,
                       std::uint64_t seed, const std::string& source, bool automatic) {
  Pomdp shape;
  shape.actions = static_cast<int>(records.codebook.actions.size());
  shape.observations = static_cast<int>(records.codebook.observations.size());
  shape.horizon = std::max({1, records.logged.horizon, records.pilot.horizon});
  shape.rewards = Vector::Zero(shape.observations);
  if (shape.actions < 1) throw InputError(source, 0, "", "no episode takes an action, so there is nothing to fit");

  RecordsFit f;
  f.selection = select_latent_states(records.logged, records.pilot, shape, fit, selection, seed);
  const FitResult& best = f.selection.best().fit;
  f.evidence = transition_evidence(expected_counts_by_regime(best.model, best.decision, records.logged, records.pilot));
  f.codebook = records.codebook;
  f.logged_episodes = records.logged.count;
  f.pilot_episodes = records.pilot.count;
  f.horizon = shape.horizon;
  f.shortest = shape.horizon;
  for (const Dataset* d : {&records.logged, &records.pilot})
    for (int i = 0; i < d->count; ++i) f.shortest = std::min(f.shortest, d->length(i));
  f.source = std::filesystem::path(source).filename().string();
  f.chosen_by = automatic ? "auto" : "given";
  return f;
}

Environment fitted_environment(const RecordsFit& f) {
  const FitResult& r = f.selection.best().fit;
  Environment env;
  env.model = r.model;
  env.model.rewards = f.codebook.has_rewards()
                          ? Vector(Eigen::Map<const Vector>(f.codebook.rewards.data(), static_cast<Eigen::Index>(f.codebook.rewards.size())))
                          : Vector(Vector::Zero(r.model.observations));
  env.logging_policy = r.decision;
  return env;
}

std::string selection_csv(const Selection& s) {
  std::string out = "latent_states,loglik,parameters,bic,heldout_loglik,chosen\n";
  for (const SizeFit& z : s.sizes)
    out += fmt::format("{},{},{},{},{},{}\n", z.latent_states, csv_number(z.fit.loglik), z.parameters, csv_number(z.bic),
                       z.heldout ? csv_number(z.heldout_loglik) : std::string(), z.chosen ? 1 : 0);
  return out;
}

std::string evidence_csv(const RecordsFit& f) {
  std::string out = "latent_state,action,logged_transitions,pilot_transitions\n";
  const Evidence& e = f.evidence;
  for (Eigen::Index z = 0; z < e.logged.rows(); ++z)
    for (Eigen::Index a = 0; a < e.logged.cols(); ++a)
      out += fmt::format("{},{},{},{}\n", z, csv_field(f.codebook.actions[static_cast<std::size_t>(a)]),
                         csv_number(e.logged(z, a)), csv_number(e.pilot(z, a)));
  return out;
}

namespace {

std::string code(const std::vector<std::string>& codes, Eigen::Index i) {
  return markdown_text(codes[static_cast<std::size_t>(i)]);
}

// "mostly shows calm (0.81), restless (0.15)": the observation codes latent value z emits with
// probability at least 0.1, most likely first (at most three).
std::string shows(const Pomdp& m, const Codebook& cb, Eigen::Index z) {
  std::vector<Eigen::Index> o(static_cast<std::size_t>(m.observations));
  for (Eigen::Index k = 0; k < m.observations; ++k) o[static_cast<std::size_t>(k)] = k;
  std::stable_sort(o.begin(), o.end(), [&](Eigen::Index x, Eigen::Index y) { return m.emissions(z, x) > m.emissions(z, y); });
  std::string s;
  for (std::size_t k = 0; k < o.size() && k < 3; ++k) {
    if (k > 0 && m.emissions(z, o[k]) < 0.1) break;
    s += fmt::format("{}{} ({:.2f})", k > 0 ? ", " : "", code(cb.observations, o[k]), m.emissions(z, o[k]));
  }
  return s;
}

std::string cell(double x) { return fmt::format("{:.1f}", x); }

}  // namespace

std::string fit_markdown(const RecordsFit& f) {
  const Selection& s = f.selection;
  const SizeFit& best = s.best();
  const Pomdp& m = best.fit.model;
  std::string md = fmt::format("# Fit of the records {}\n\n", markdown_text(f.source));
  md += "A regime-aware latent model (an input-output hidden Markov model) fitted by expectation-maximisation "
        "with restarts: logged steps are explained by a latent decision rule, pilot steps are interventions.\n\n";
  md += "## Sizes\n\n";
  md += fmt::format("* episodes: {} logged, {} pilot; {} observed steps (observations) in all\n", f.logged_episodes,
                    f.pilot_episodes, csv_number(s.observations));
  md += fmt::format("* episode length: {} to {} actions (the horizon is the longest)\n", f.shortest, f.horizon);
  md += fmt::format("* codes: {} observations, {} actions; rewards {}\n", f.codebook.observations.size(),
                    f.codebook.actions.size(), f.codebook.has_rewards() ? "from the codebook" : "not given (0)");
  md += "\n## Latent size\n\n";
  if (f.chosen_by == "auto" && s.folds == 0)
    md += "Sizes tried in ascending order. The records hold too few episodes for held-out folds, so the size was "
          "**chosen by BIC** (Schwarz 1978) = -2 loglik + parameters x ln n, with n the number of observed steps: the "
          "smallest value wins. More episodes would allow the held-out choice.\n\n";
  else if (f.chosen_by == "auto")
    md += "Sizes tried in ascending order, stopping after two sizes in a row that did not improve the held-out "
          "log-likelihood. Each size is fitted on all episodes and, for the held-out log-likelihood, on all but one "
          "of the episode folds with the held-out fold scored (every episode scored once). **Chosen**: the size with "
          "the highest held-out log-likelihood, or the smallest size within one standard error of it (paired over "
          "episodes; the one-standard-error rule, Hastie, Tibshirani and Friedman 2009, sec. 7.10). BIC "
          "(Schwarz 1978) = -2 loglik + parameters x ln n, with n the number of observed steps, is shown beside.\n\n";
  else
    md += fmt::format("The latent size was given ({}).\n\n", best.latent_states);
  md += "| latent states | loglik | parameters | BIC | held-out loglik | held-out gap (se) | chosen |\n";
  md += "|---:|---:|---:|---:|---:|---:|:---:|\n";
  const double top = std::max_element(s.sizes.begin(), s.sizes.end(), [](const SizeFit& a, const SizeFit& b) {
                       return a.heldout_loglik < b.heldout_loglik;
                     })->heldout_loglik;
  for (const SizeFit& z : s.sizes)
    md += fmt::format("| {} | {:.2f} | {} | {:.2f} | {} | {} | {} |\n", z.latent_states, z.fit.loglik, z.parameters, z.bic,
                      z.heldout ? fmt::format("{:.2f}", z.heldout_loglik) : "-",
                      z.heldout ? fmt::format("{:.2f} ({:.2f})", top - z.heldout_loglik, z.heldout_se) : "-",
                      z.chosen ? "yes" : "");
  md += "\n## Diagnostics\n\n";
  md += "| latent states | starts | restarts agree | converged | EM steps (kept start) | fold fits converged | fold fits agreeing |\n";
  md += "|---:|---:|:---:|:---:|---:|---:|---:|\n";
  for (const SizeFit& z : s.sizes) {
    const int folds = z.heldout ? static_cast<int>(s.folds) : 0;
    md += fmt::format("| {} | {} | {} | {} | {} | {} | {} |\n", z.latent_states, z.fit.starts, z.fit.confirmed ? "yes" : "no",
                      z.fit.converged ? "yes" : "no", z.fit.iterations,
                      folds ? fmt::format("{}/{}", z.fold_fits_converged, folds) : "-",
                      folds ? fmt::format("{}/{}", z.fold_fits_confirmed, folds) : "-");
  }
  if (!best.fit.confirmed)
    md += "\nThe chosen fit's best optimum was reached by one start only: another start may find a better one "
          "(raise `--restarts`).\n";
  if (!best.fit.converged) md += "\nThe chosen fit stopped at the iteration cap before converging.\n";

  md += "\n## Latent values\n\n";
  for (Eigen::Index z = 0; z < m.states; ++z)
    md += fmt::format("* latent value {}: starts with probability {:.2f}, mostly shows {}\n", z, m.initial(z), shows(m, f.codebook, z));
  md += "\n## Evidence: expected transitions per latent value and action\n\n";
  md += "| latent value | action | logged | pilot | total |\n|---:|---|---:|---:|---:|\n";
  const Evidence& e = f.evidence;
  std::vector<std::string> open;
  for (Eigen::Index z = 0; z < e.logged.rows(); ++z)
    for (Eigen::Index a = 0; a < e.logged.cols(); ++a) {
      const double total = e.logged(z, a) + e.pilot(z, a);
      md += fmt::format("| {} | {} | {} | {} | {} |\n", z, code(f.codebook.actions, a), cell(e.logged(z, a)),
                        cell(e.pilot(z, a)), cell(total));
      if (total < open_evidence)
        open.push_back(fmt::format("* what {} does in latent value {} (which mostly shows {}): {} expected transitions",
                                   code(f.codebook.actions, a), z, shows(m, f.codebook, z), cell(total)));
    }
  md += "\n## What the records leave open\n\n";
  if (open.empty()) {
    md += fmt::format("Every action was seen at least {} times (in expectation) in every latent value: the records "
                      "inform every action effect, though rarely seen ones less precisely.\n",
                      open_evidence);
  } else {
    md += fmt::format("The records show fewer than {} expected transitions for these pairs, so they say little about "
                      "them; this is what a pilot has to inform (in plausible worlds drawn from these records, these "
                      "rows follow the prior):\n\n",
                      open_evidence);
    for (const auto& line : open) md += line + "\n";
  }
  md += "\nLatent values are the model's own states, numbered by the fit; they need not match any state the team "
        "names. Caution: a fitted model under stated assumptions, no substitute for a qualified statistician.\n";
  return md;
}

void write_fit_directory(const std::filesystem::path& dir, const RecordsFit& f) {
  const std::string model = model_yaml(fitted_environment(f));
  const std::string selection = selection_csv(f.selection);
  const std::string evidence = evidence_csv(f);
  const std::string page = fit_markdown(f);
  std::filesystem::create_directories(dir);
  write_file_atomically(dir / "model.yaml", model);
  write_file_atomically(dir / "selection.csv", selection);
  write_file_atomically(dir / "evidence.csv", evidence);
  write_file_atomically(dir / "fit.md", page);
}

}  // namespace dobudget::io
