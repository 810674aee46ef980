#include "io/run_directory.hpp"

#include <Eigen/Core>
#include <boost/version.hpp>
#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include <chrono>
#include <ctime>
#include <stdexcept>

#include "core/running/runner.hpp"
#include "core/world/seeding.hpp"
#include "io/atomic_file.hpp"
#include "io/expected_rows.hpp"
#include "io/input_error.hpp"
#include "io/journal.hpp"
#include "io/runs_table.hpp"

namespace dobudget::io {

std::vector<std::size_t> shard_units(std::size_t total, const Shard& shard) {
  std::vector<std::size_t> out;
  for (std::size_t i = static_cast<std::size_t>(shard.index); i < total; i += static_cast<std::size_t>(shard.count))
    out.push_back(i);
  return out;
}

std::string study_hash(const std::string& resolved) { return fmt::format("{:016x}", name_key(resolved)); }

namespace {

// True when `dir` holds nothing but an empty units.journal: what a `plan` leaves for an instant
// between creating (and locking) the journal and writing study.resolved.yaml.
bool holds_only_empty_journal(const std::filesystem::path& dir) {
  std::error_code ec;
  for (const auto& entry : std::filesystem::directory_iterator(dir, ec)) {
    if (entry.path().filename() != "units.journal") return false;
    if (std::filesystem::file_size(entry.path(), ec) != 0 || ec) return false;
  }
  return !ec;
}

}  // namespace

void check_directory_claim(const std::filesystem::path& dir, const std::string& resolved) {
  const auto resolved_file = dir / "study.resolved.yaml";
  if (std::filesystem::exists(dir) && !std::filesystem::is_directory(dir))
    throw std::runtime_error(dir.string() + " exists and is not a directory; choose another --out directory");
  if (std::filesystem::exists(resolved_file)) {
    const std::string theirs = read_file(resolved_file);
    if (theirs != resolved)
      throw std::runtime_error(fmt::format(
          "{} holds a different study (its study.resolved.yaml has hash {}, this study {}); choose another --out "
          "directory",
          dir.string(), study_hash(theirs), study_hash(resolved)));
    return;
  }
  if (std::filesystem::exists(dir) && !std::filesystem::is_empty(dir) && !holds_only_empty_journal(dir))
    throw std::runtime_error(dir.string() + " exists, is not empty and is not a dobudget run directory; choose another --out directory");
}

void claim_directory(const std::filesystem::path& dir, const std::string& resolved) {
  check_directory_claim(dir, resolved);
  const auto resolved_file = dir / "study.resolved.yaml";
  if (std::filesystem::exists(resolved_file)) return;
  std::filesystem::create_directories(dir);
  write_file_atomically(resolved_file, resolved);
}

std::string utc_timestamp() {
  const std::time_t t = std::time(nullptr);
  std::tm utc{};
  ::gmtime_r(&t, &utc);
  char buf[32];
  std::strftime(buf, sizeof buf, "%Y-%m-%dT%H:%M:%SZ", &utc);
  return buf;
}

void write_run_tables(const std::filesystem::path& dir, const std::vector<RunRecord>& rows) {
  write_file_atomically(dir / "runs.csv", runs_csv(rows));
  write_file_atomically(dir / "timings.csv", timings_csv(rows));
}

PlanOutcome plan_study(const Study& study, const std::string& resolved, const PlanOptions& opt) {
  const auto start = std::chrono::steady_clock::now();
  const std::vector<UnitId> units = enumerate_units(study);
  const std::vector<std::size_t> mine = shard_units(units.size(), opt.shard.value_or(Shard{}));

  // The directory is claimed (checked, study.resolved.yaml written) while the journal's lock is
  // held, so of two runs racing for one new directory exactly one claims it; the other finds the
  // lock taken, or the directory claimed by a study that is not its own. Every record read back
  // must hold its unit's rows.
  if (std::filesystem::exists(opt.out) && !std::filesystem::is_directory(opt.out))
    throw std::runtime_error(opt.out.string() + " exists and is not a directory; choose another --out directory");
  std::filesystem::create_directories(opt.out);
  Journal journal(
      opt.out / "units.journal", study_hash(resolved), [&] { claim_directory(opt.out, resolved); },
      [&](std::size_t index, const std::vector<RunRecord>& rows) { return unit_rows_problem(study, units, index, rows); });
  PlanOutcome out;
  out.units_total = mine.size();
  out.torn_record_dropped = journal.torn_tail_dropped();
  std::vector<std::size_t> todo;
  for (std::size_t i : mine) {
    if (journal.units().count(i)) ++out.units_resumed;
    else todo.push_back(i);
  }
  if (opt.before_computing) opt.before_computing(units, todo);
  Progress progress{out.units_resumed, mine.size(), 0, 0.0};
  ExecutorHooks hooks;
  const auto count_done = [&](std::size_t n) {
    progress.done += n;
    progress.computed += n;
    progress.elapsed_seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
    if (opt.on_progress) opt.on_progress(progress);
  };
  hooks.on_unit = [&](std::size_t index, std::vector<RunRecord>&& rows) {
    journal.append(index, std::move(rows));  // the journal keeps the rows: moved, not copied
    count_done(1);
  };
  hooks.on_records = [&](Journal::Batch&& batch) {
    const std::size_t n = batch.units.size();
    journal.append_batch(std::move(batch));
    count_done(n);
  };
  hooks.stop_requested = opt.stop_requested;
  if (opt.executor) opt.executor(study, units, todo, opt.threads, hooks);
  else run_units(study, units, todo, opt.threads, hooks);

  out.units_done = progress.done;
  out.complete = out.units_done == out.units_total;
  out.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  if (out.complete) {
    for (std::size_t i : mine) {
      const auto& rows = journal.units().at(i);
      out.rows.insert(out.rows.end(), rows.begin(), rows.end());
    }
    if (!opt.shard || opt.shard->count == 1) {
      // Never a runs.csv that is not the study's full, consistent set of rows. Every record was
      // checked against its unit with unit_rows_problem (read back from the journal here, received
      // from an MPI worker by the coordinator; the rest were computed by this process), so a
      // failure here is a bug, not the user's input.
      try {
        check_rows_against_study(study, out.rows, (opt.out / "runs.csv").string());
      } catch (const InputError& e) {
        throw std::logic_error(std::string("the rows about to be written are inconsistent: ") + e.what());
      }
      write_run_tables(opt.out, out.rows);
    }
  }
  return out;
}

nlohmann::ordered_json manifest_base(const Study& study, const std::string& resolved) {
  nlohmann::ordered_json j;
  j["program"] = "dobudget";
  j["version"] = DOBUDGET_VERSION;
  j["study"] = study.name;
  j["study_hash"] = study_hash(resolved);
  j["seed"] = study.seed;
  j["seeding"] =
      "every stream: boost::random::mt19937_64 seeded with SplitMix64 folds of (seed, scenario, draw, replicate, "
      "purpose, sub-key); purposes 1 environment, 2 logged, 3 pilot, 4 evaluation, 5 fit, 6 planner, 7 rollout, 8 "
      "bootstrap";
  j["libraries"] = {{"eigen", fmt::format("{}.{}.{}", EIGEN_WORLD_VERSION, EIGEN_MAJOR_VERSION, EIGEN_MINOR_VERSION)},
                    {"boost", BOOST_LIB_VERSION},
                    {"fmt", FMT_VERSION},
                    {"nlohmann_json", fmt::format("{}.{}.{}", NLOHMANN_JSON_VERSION_MAJOR, NLOHMANN_JSON_VERSION_MINOR,
                                                  NLOHMANN_JSON_VERSION_PATCH)},
                    {"compiler", __VERSION__}};
  const std::vector<UnitId> units = enumerate_units(study);
  std::size_t fits = 0;
  for (const auto& u : units)
    fits += static_cast<std::size_t>(fits_per_unit(study.scenarios[static_cast<std::size_t>(u.scenario)].settings));
  j["scenarios"] = study.scenarios.size();
  j["units"] = units.size();
  j["fits"] = fits;
  return j;
}

void write_manifest(const std::filesystem::path& dir, const Study& study, const std::string& resolved,
                    const PlanOptions& opt, const PlanOutcome& outcome) {
  nlohmann::ordered_json j = manifest_base(study, resolved);
  if (opt.shard) j["shard"] = fmt::format("{}/{}", opt.shard->index, opt.shard->count);
  j["threads"] = opt.threads;
  j["units_in_this_directory"] = outcome.units_done;
  j["units_resumed"] = outcome.units_resumed;
  j["complete"] = outcome.complete;
  j["wall_seconds"] = outcome.seconds;
  j["finished_utc"] = utc_timestamp();
  write_file_atomically(dir / "manifest.json", j.dump(2) + "\n");
}

}  // namespace dobudget::io
