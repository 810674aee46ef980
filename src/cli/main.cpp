// dobudget command line: parses, calls the libraries, prints. Exit codes: 0 success, 1 internal
// failure, 2 bad input (file, line and key named; nothing half-written), 130 interrupted.
#include <CLI/CLI.hpp>
#include <fmt/format.h>
#include <unistd.h>

#include <atomic>
#include <csignal>
#include <cstdio>
#include <thread>

#include "core/answer.hpp"
#include "core/synthetic.hpp"
#include "core/unit.hpp"
#include "io/answer_table.hpp"
#include "io/atomic_file.hpp"
#include "io/input_error.hpp"
#include "io/model_file.hpp"
#include "io/run_directory.hpp"
#include "io/runs_table.hpp"
#include "io/study_file.hpp"
#include "io/summary_table.hpp"

namespace {

using namespace dobudget;

constexpr const char* caution =
    "dobudget is a simulation under stated assumptions (the synthetic family or the given model, the logging\n"
    "model, the pilot policy). Its numbers are no substitute for a qualified statistician, for ethics review,\n"
    "or for the regulations that govern trials where you work.";

std::atomic<bool> interrupted{false};
extern "C" void on_sigint(int) { interrupted = true; }

struct BadInput : std::runtime_error {
  using std::runtime_error::runtime_error;
};

io::Shard parse_shard(const std::string& s) {
  const auto slash = s.find('/');
  try {
    if (slash == std::string::npos) throw std::invalid_argument("");
    std::size_t p1 = 0, p2 = 0;
    const int k = std::stoi(s.substr(0, slash), &p1), n = std::stoi(s.substr(slash + 1), &p2);
    if (p1 != slash || p2 != s.size() - slash - 1 || n < 1 || k < 0 || k >= n) throw std::invalid_argument("");
    return {k, n};
  } catch (const std::logic_error&) {
    throw BadInput("--shard " + s + ": expected K/N with 0 <= K < N, e.g. --shard 0/4");
  }
}

int default_threads() { return static_cast<int>(std::max(1u, std::thread::hardware_concurrency())); }

std::string progress_line(const io::Progress& p) {
  const double rate = p.computed > 0 ? p.elapsed_seconds / static_cast<double>(p.computed) : 0.0;
  const double eta = rate * static_cast<double>(p.total - p.done);
  return fmt::format("units {}/{} ({:.0f}%), {:.0f} s elapsed, about {:.0f} s left", p.done, p.total,
                     100.0 * static_cast<double>(p.done) / static_cast<double>(std::max<std::size_t>(1, p.total)),
                     p.elapsed_seconds, eta);
}

int cmd_plan(const std::string& study_file, std::string out, int threads, const std::string& shard_text, bool quiet) {
  const Study study = io::load_study(study_file);
  const std::string resolved = io::resolved_yaml(study);
  io::PlanOptions opt;
  opt.out = out.empty() ? std::filesystem::path("runs") / study.name : std::filesystem::path(out);
  opt.threads = threads > 0 ? threads : default_threads();
  if (!shard_text.empty()) opt.shard = parse_shard(shard_text);
  const bool tty = ::isatty(::fileno(stderr)) != 0;
  double last = -1.0;
  opt.on_progress = [&](const io::Progress& p) {
    if (quiet) return;
    if (tty) {
      std::fprintf(stderr, "\r%s   ", progress_line(p).c_str());
    } else if (p.elapsed_seconds - last >= 10.0 || p.done == p.total) {
      std::fprintf(stderr, "%s\n", progress_line(p).c_str());
      last = p.elapsed_seconds;
    }
  };
  opt.stop_requested = [] { return interrupted.load(); };
  std::signal(SIGINT, on_sigint);
  std::signal(SIGTERM, on_sigint);

  if (!quiet)
    std::fprintf(stderr, "dobudget plan: study '%s', %zu scenario(s), %zu units, %d thread(s), writing %s\n",
                 study.name.c_str(), study.scenarios.size(), enumerate_units(study).size(), opt.threads,
                 opt.out.string().c_str());
  const io::PlanOutcome outcome = io::plan_study(study, resolved, opt);
  if (tty && !quiet) std::fprintf(stderr, "\n");
  io::write_manifest(opt.out, study, resolved, opt, outcome);
  if (outcome.torn_record_dropped)
    std::fprintf(stderr, "note: the last record of units.journal was torn by an interruption; that unit was computed again\n");
  if (!outcome.complete) {
    std::fprintf(stderr,
                 "stopped: %zu of %zu units are finished and recorded in %s/units.journal.\n"
                 "Run the same command again to compute only the missing units.\n",
                 outcome.units_done, outcome.units_total, opt.out.string().c_str());
    return 130;
  }
  if (opt.shard && opt.shard->count > 1) {
    std::printf("shard %d/%d: %zu units done in %.1f s (%zu resumed); combine the shards with `dobudget merge`\n",
                opt.shard->index, opt.shard->count, outcome.units_done, outcome.seconds, outcome.units_resumed);
    return 0;
  }
  std::printf("%s", io::format_summary(study, outcome.rows).c_str());
  const auto answers = compute_study_answers(study, outcome.rows);
  io::write_answer_files(opt.out, study, answers);
  std::printf("\n%s", io::format_answer_table(answers).c_str());
  std::printf("\nrun directory: %s (runs.csv, answer.csv, answer.md, manifest.json); %zu units in %.1f s%s\n",
              opt.out.string().c_str(), outcome.units_done, outcome.seconds,
              outcome.units_resumed ? fmt::format(" ({} resumed)", outcome.units_resumed).c_str() : "");
  std::printf("\n%s\n", caution);
  return 0;
}

// "model_kl=0.01" -> (model_kl, 0.01)
std::pair<Measure, double> parse_target(const std::string& text) {
  const auto eq = text.find('=');
  const auto m = parse_measure(text.substr(0, eq == std::string::npos ? 0 : eq));
  try {
    std::size_t used = 0;
    if (eq == std::string::npos || !m) throw std::invalid_argument("");
    const double v = std::stod(text.substr(eq + 1), &used);
    if (used != text.size() - eq - 1 || !(v > 0.0)) throw std::invalid_argument("");
    return {*m, v};
  } catch (const std::logic_error&) {
    throw BadInput("--target " + text + ": expected MEASURE=VALUE with MEASURE model_kl or return_gap and VALUE > 0");
  }
}

int cmd_answer(const std::string& dir_text, const std::vector<std::string>& targets, double assurance,
               const std::string& criterion, int bootstrap) {
  const std::filesystem::path dir(dir_text);
  if (!std::filesystem::exists(dir / "study.resolved.yaml"))
    throw BadInput(dir_text + " is not a dobudget run directory (no study.resolved.yaml)");
  if (!std::filesystem::exists(dir / "runs.csv"))
    throw BadInput(dir_text + " has no runs.csv yet: finish the run with `dobudget plan` (or `merge` its shards) first");
  const Study study = io::load_study(dir / "study.resolved.yaml");
  AnswerOverrides ov;
  for (const auto& t : targets) ov.targets.insert(parse_target(t));
  if (assurance > 0.0) {
    if (!(assurance < 1.0)) throw BadInput("--assurance must be in (0, 1)");
    ov.assurance = assurance;
  }
  if (!criterion.empty()) {
    ov.criterion = parse_criterion(criterion);
    if (!ov.criterion) throw BadInput("--criterion " + criterion + ": expected assurance or mean");
  }
  if (bootstrap >= 0) ov.bootstrap = bootstrap;
  for (const auto& [m, t] : ov.targets) {
    bool measured = false;
    for (const auto& sc : study.scenarios)
      for (Measure k : sc.settings.measures) measured = measured || k == m;
    if (!measured) throw BadInput(fmt::format("--target {}: this study did not measure {}", name(m), name(m)));
  }
  const auto rows = io::read_runs(dir / "runs.csv");
  const auto answers = compute_study_answers(study, rows, ov);
  io::write_answer_files(dir, study, answers);
  std::printf("%s", io::format_answer_table(answers).c_str());
  std::printf("\nwrote %s and %s\n\n%s\n", (dir / "answer.csv").string().c_str(), (dir / "answer.md").string().c_str(),
              caution);
  return 0;
}

int cmd_check(const std::string& study_file) {
  const Study study = io::load_study(study_file);
  std::printf("%s", io::resolved_yaml(study).c_str());
  std::size_t units = 0, fits = 0;
  for (const auto& u : enumerate_units(study)) {
    ++units;
    fits += static_cast<std::size_t>(fits_per_unit(study.scenarios[static_cast<std::size_t>(u.scenario)].settings));
  }
  std::printf("# valid study: %zu scenario(s), %zu units, %zu model fits\n", study.scenarios.size(), units, fits);
  return 0;
}

int cmd_draw(const std::string& study_file, const std::string& out) {
  const Study study = io::load_study(study_file);
  const std::filesystem::path dir = out.empty() ? std::filesystem::path("environments") / study.name : std::filesystem::path(out);
  std::filesystem::create_directories(dir);
  for (const auto& sc : study.scenarios) {
    const int draws = sc.settings.environment.given ? 1 : sc.settings.environment.draws;
    for (int d = 0; d < draws; ++d) {
      const Environment env = make_environment(
          sc.settings, StreamKey{study.seed, static_cast<std::uint64_t>(sc.index), static_cast<std::uint64_t>(d), 0});
      const auto file = dir / fmt::format("scenario-{}-environment-{}.yaml", sc.index, d);
      io::write_file_atomically(file, io::model_yaml(env));
      std::printf("%s\n", file.string().c_str());
    }
  }
  return 0;
}

}  // namespace

int main(int argc, char** argv) {
  CLI::App app{
      "dobudget: how many pilot episodes do you need, given the logged episodes you hold?\n"
      "It simulates partially observable problems of your sizes (or your own model), sweeps logged and pilot\n"
      "budgets, fits models three ways (pilot-only, pooled, regime-aware), and reports the pilot budget that\n"
      "reaches a target model error with a stated assurance.",
      "dobudget"};
  app.footer(std::string("\nExamples:\n"
                         "  dobudget check configs/default.yaml          validate, show every default, count fits\n"
                         "  dobudget plan configs/default.yaml --threads 2\n"
                         "  dobudget plan study.yaml --shard 3/10 --out runs/part3   (one job-array task)\n"
                         "  dobudget answer runs/default --target model_kl=0.01 --assurance 0.9   (re-analysis, seconds)\n"
                         "  dobudget draw configs/default.yaml --out envs   (write the synthetic environments)\n\n"
                         "Caution: ") +
             caution);
  app.require_subcommand(1);
  app.set_version_flag("--version", std::string(DOBUDGET_VERSION));

  std::string study_file, out, shard;
  int threads = 0;
  bool quiet = false;
  auto* plan = app.add_subcommand("plan", "Simulate the study, write the run directory and print the results");
  plan->add_option("study", study_file, "Study file (YAML)")->required();
  plan->add_option("--out", out, "Run directory (default: runs/<study name>); rerun on it to resume");
  plan->add_option("--threads", threads, "Worker threads (default: all cores)")->check(CLI::PositiveNumber);
  plan->add_option("--shard", shard, "Compute only shard K of N (K = 0..N-1, as job-array indices run)");
  plan->add_flag("--quiet", quiet, "No progress messages");

  auto* check = app.add_subcommand("check", "Validate a study, print it with every default filled in, count the fits");
  check->add_option("study", study_file, "Study file (YAML)")->required();

  auto* draw = app.add_subcommand("draw", "Write each synthetic environment of a study as a model file (YAML)");
  draw->add_option("study", study_file, "Study file (YAML)")->required();
  draw->add_option("--out", out, "Directory for the model files (default: environments/<study name>)");

  std::vector<std::string> targets;
  double assurance = 0.0;
  std::string criterion;
  int bootstrap = -1;
  auto* answer = app.add_subcommand("answer", "Recompute the answer from a finished run directory (no simulation)");
  answer->add_option("dir", out, "Run directory")->required();
  answer->add_option("--target", targets, "MEASURE=VALUE, e.g. model_kl=0.01 (repeatable; replaces the study's target)");
  answer->add_option("--assurance", assurance, "Fraction of (draw, replicate) pairs that must meet the target, in (0, 1)");
  answer->add_option("--criterion", criterion, "assurance (default: fraction of pairs meeting the target) or mean (mean measure meets it)");
  answer->add_option("--bootstrap", bootstrap, "Bootstrap resamples for the 90% interval (default 1000; 0: none)");

  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    return app.exit(e) == 0 ? 0 : 2;
  }
  try {
    if (*plan) return cmd_plan(study_file, out, threads, shard, quiet);
    if (*check) return cmd_check(study_file);
    if (*draw) return cmd_draw(study_file, out);
    if (*answer) return cmd_answer(out, targets, assurance, criterion, bootstrap);
  } catch (const io::InputError& e) {
    std::fprintf(stderr, "error: %s\n", e.what());
    return 2;
  } catch (const BadInput& e) {
    std::fprintf(stderr, "error: %s\n", e.what());
    return 2;
  } catch (const std::runtime_error& e) {
    std::fprintf(stderr, "error: %s\n", e.what());
    return 2;
  } catch (const std::exception& e) {
    std::fprintf(stderr, "internal error: %s\n", e.what());
    return 1;
  }
  return 0;
}
