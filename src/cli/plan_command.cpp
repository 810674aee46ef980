// dobudget plan: simulate a study into a run directory (resumable), print the results and the answer.
#include <fmt/format.h>
#include <unistd.h>

#include <atomic>
#include <csignal>
#include <cstdio>
#include <thread>

#include "cli/commands.hpp"
#include "core/answer.hpp"
#include "core/unit.hpp"
#include "io/answer_table.hpp"
#include "io/run_directory.hpp"
#include "io/study_file.hpp"
#include "io/summary_table.hpp"

namespace dobudget::cli {
namespace {

std::atomic<bool> interrupted{false};
extern "C" void on_interrupt(int) { interrupted = true; }

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

}  // namespace

int plan_command(const PlanArgs& args) {
  const std::string& study_file = args.study;
  const std::string& out = args.out;
  const std::string& shard_text = args.shard;
  const int threads = args.threads;
  const bool quiet = args.quiet;
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
  std::signal(SIGINT, on_interrupt);
  std::signal(SIGTERM, on_interrupt);

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

}  // namespace dobudget::cli
