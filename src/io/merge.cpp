#include "io/merge.hpp"

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include <charconv>
#include <chrono>
#include <set>

#include "core/running/unit.hpp"
#include "io/answer_table.hpp"
#include "io/atomic_file.hpp"
#include "io/expected_rows.hpp"
#include "io/finished_run.hpp"
#include "io/input_error.hpp"
#include "io/journal.hpp"
#include "io/study_file.hpp"

namespace dobudget::io {
namespace {

namespace fs = std::filesystem;

constexpr std::size_t max_listed = 10;  // units or shards named in one message

std::string shard_text(const Shard& s) { return fmt::format("{}/{}", s.index, s.count); }

// "K/N" as write_manifest writes it; nullopt for anything else.
std::optional<Shard> parse_shard(const std::string& s) {
  const auto slash = s.find('/');
  if (slash == std::string::npos) return std::nullopt;
  int k = -1, n = 0;
  const auto r1 = std::from_chars(s.data(), s.data() + slash, k);
  const auto r2 = std::from_chars(s.data() + slash + 1, s.data() + s.size(), n);
  if (r1.ec != std::errc() || r1.ptr != s.data() + slash || r2.ec != std::errc() || r2.ptr != s.data() + s.size() ||
      n < 1 || k < 0 || k >= n)
    return std::nullopt;
  return Shard{k, n};
}

// The shard and wall time an input's manifest.json gives. The manifest is informative only (the
// journal is what counts): a missing or unreadable one gives nothing. A run killed before it
// finished (SIGKILL, pre-emption) has not written its manifest yet.
void read_manifest(MergeInput& input) {
  const fs::path file = input.dir / "manifest.json";
  if (!fs::exists(file)) return;
  try {
    const auto j = nlohmann::json::parse(read_file(file));
    if (j.contains("shard") && j["shard"].is_string()) input.shard = parse_shard(j["shard"].get<std::string>());
    if (j.contains("wall_seconds") && j["wall_seconds"].is_number()) input.wall_seconds = j["wall_seconds"].get<double>();
  } catch (const std::exception&) {
  }
}

// The command that resumes (or finishes) an input directory, in backquotes. Its own
// study.resolved.yaml loads back into the same study, so it serves as the study file.
std::string resume_command(const MergeInput& input) {
  const std::string study = (input.dir / "study.resolved.yaml").string();
  if (input.shard)
    return fmt::format("`dobudget plan {} --shard {} --out {}`", study, shard_text(*input.shard), input.dir.string());
  return fmt::format("`dobudget plan {} [--shard K/N] --out {}`, with the --shard it was started with, if any", study,
                     input.dir.string());
}

// The shard K/N of a split into N whose units are exactly those of `indices` modulo N: how an
// input without a manifest (a killed run) is recognised. nullopt when there is no such K, or
// when N is unknown (split == 0).
std::optional<Shard> infer_shard(const std::map<std::size_t, std::vector<RunRecord>>& records, int split) {
  if (split < 1 || records.empty()) return std::nullopt;
  const std::size_t n = static_cast<std::size_t>(split);
  const std::size_t k = records.begin()->first % n;
  for (const auto& [index, rows] : records)
    if (index % n != k) return std::nullopt;
  return Shard{static_cast<int>(k), split};
}

fs::path canonical_or_same(const fs::path& p) {
  std::error_code ec;
  const fs::path c = fs::weakly_canonical(p, ec);
  return ec ? p : c;
}

void check_is_run_directory(const fs::path& dir) {
  if (!fs::exists(dir)) throw MergeError(dir.string() + " does not exist");
  if (!fs::is_directory(dir)) throw MergeError(dir.string() + " is not a directory");
  if (!fs::exists(dir / "study.resolved.yaml"))
    throw MergeError(dir.string() + " is not a dobudget run directory (it has no study.resolved.yaml)");
}

std::string duplicate_message(std::size_t index, const UnitId& unit, const MergeInput& a, const MergeInput& b,
                              std::size_t more, std::size_t total) {
  std::string s = fmt::format("{} is in both {} and {}; each unit must come from exactly one input directory",
                              describe_unit(index, unit), a.dir.string(), b.dir.string());
  if (a.shard && b.shard && a.shard->index == b.shard->index && a.shard->count == b.shard->count)
    s += fmt::format(" ({} and {} both hold shard {}: list only one of them)", a.dir.string(), b.dir.string(),
                     shard_text(*a.shard));
  for (const MergeInput* in : {&a, &b})
    if (in->units == total)
      s += fmt::format(" ({} holds every unit of the study: merge it on its own, or leave it out)", in->dir.string());
  if (more > 0) s += fmt::format("; {} more unit{} in two inputs", more, more == 1 ? " is" : "s are");
  return s;
}

// `split`: the N of --shard K/N when the inputs name a single one, else 0.
std::string missing_message(const std::vector<int>& owner, const std::vector<UnitId>& units,
                            const std::vector<MergeInput>& inputs, int split) {
  std::vector<std::size_t> missing;
  for (std::size_t i = 0; i < owner.size(); ++i)
    if (owner[i] < 0) missing.push_back(i);
  std::string s = fmt::format("the inputs hold {} of the study's {} units; {} {} missing", units.size() - missing.size(),
                              units.size(), missing.size(), missing.size() == 1 ? "is" : "are");
  if (split > 0) {
    // Attribute the missing units to the shards of that split (unit i belongs to shard i mod N).
    const int n = split;
    std::vector<std::size_t> missing_in(static_cast<std::size_t>(n), 0);
    for (std::size_t i : missing) ++missing_in[i % static_cast<std::size_t>(n)];
    std::size_t listed = 0, unlisted = 0;
    for (int k = 0; k < n; ++k) {
      const std::size_t m = missing_in[static_cast<std::size_t>(k)];
      if (m == 0) continue;
      if (listed == max_listed) {
        ++unlisted;
        continue;
      }
      ++listed;
      const Shard shard{k, n};
      const std::size_t size = shard_units(units.size(), shard).size();
      const MergeInput* holder = nullptr;
      for (const auto& in : inputs)
        if (in.shard && in.shard->index == k && in.shard->count == n && holder == nullptr) holder = &in;
      if (holder != nullptr)
        s += fmt::format("\n  shard {}: {} of its {} units are missing from {}: that run is unfinished; resume it by "
                         "running its command again ({})",
                         shard_text(shard), m, size, holder->dir.string(), resume_command(*holder));
      else
        s += fmt::format("\n  shard {}: not among the inputs ({} units); run `dobudget plan STUDY.yaml --shard {} --out "
                         "DIR` and list DIR too",
                         shard_text(shard), size, shard_text(shard));
    }
    if (unlisted > 0) s += fmt::format("\n  ... and {} more shard{}", unlisted, unlisted == 1 ? "" : "s");
    for (const auto& in : inputs)
      if (!in.shard)
        s += fmt::format("\n  ({} has no manifest.json and no finished unit to tell its shard: if it is one of these, "
                         "it was stopped early; rerun its command)",
                         in.dir.string());
  } else {
    for (std::size_t j = 0; j < missing.size() && j < max_listed; ++j)
      s += "\n  " + describe_unit(missing[j], units[missing[j]]);
    if (missing.size() > max_listed) s += fmt::format("\n  ... and {} more", missing.size() - max_listed);
    bool named = false;
    for (const auto& in : inputs) named = named || in.shard.has_value();
    s += named ? "\n(the inputs come from different splits --shard K/N, so the missing units are listed by unit)"
               : "\n(no input's manifest.json names a shard K/N, so the missing units cannot be attributed to "
                 "shards; a shard run that was killed has no manifest yet)";
  }
  return s + "\nRun or resume what is missing, then merge again.";
}

}  // namespace

std::string describe_unit(std::size_t index, const UnitId& u) {
  return fmt::format("unit {} (scenario {}, environment draw {}, replicate {})", index, u.scenario, u.draw, u.replicate);
}

Merge prepare_merge(const std::vector<fs::path>& dirs, const fs::path& out) {
  const auto start = std::chrono::steady_clock::now();
  if (dirs.empty()) throw MergeError("no input directories to merge");

  // Every input is a run directory, listed once, of one study; --out may receive it.
  std::vector<fs::path> canonical;
  for (const auto& dir : dirs) {
    check_is_run_directory(dir);
    canonical.push_back(canonical_or_same(dir));
    for (std::size_t j = 0; j + 1 < canonical.size(); ++j)
      if (canonical[j] == canonical.back())
        throw MergeError(fmt::format("{} is listed twice (as {} and {}); list each input directory once",
                                     dir.string(), dirs[j].string(), dir.string()));
  }
  Merge m;
  m.resolved_yaml = read_file(dirs[0] / "study.resolved.yaml");
  for (std::size_t k = 1; k < dirs.size(); ++k) {
    const std::string theirs = read_file(dirs[k] / "study.resolved.yaml");
    if (theirs != m.resolved_yaml)
      throw MergeError(fmt::format(
          "{} holds a different study from {} (study hash {} in {}, {} in {}); every input must come from the same "
          "study file (compare their study.resolved.yaml)",
          dirs[k].string(), dirs[0].string(), study_hash(theirs), dirs[k].string(), study_hash(m.resolved_yaml),
          dirs[0].string()));
  }
  // Each input's study.resolved.yaml as planned (the hash its manifest and journal record).
  for (const auto& dir : dirs) check_recorded_study_hash(dir, m.resolved_yaml);
  m.study = load_study(dirs[0] / "study.resolved.yaml");
  const std::string hash = study_hash(m.resolved_yaml);
  const fs::path out_canonical = canonical_or_same(out);
  for (std::size_t k = 0; k < dirs.size(); ++k)
    if (canonical[k] == out_canonical)
      throw MergeError(fmt::format("--out {} is one of the inputs; choose a new directory", out.string()));
  try {
    check_directory_claim(out, m.resolved_yaml);
  } catch (const std::runtime_error& e) {
    throw MergeError(e.what());
  }
  if (Journal::in_use(out / "units.journal"))
    throw MergeError(fmt::format("--out {} is being written by a running `dobudget plan`; choose another directory",
                                 out.string()));

  // Read every journal; every record must be intact and belong to the study.
  const std::vector<UnitId> units = enumerate_units(m.study);
  m.units = units.size();
  std::vector<int> owner(units.size(), -1);
  std::vector<std::vector<RunRecord>> unit_rows(units.size());
  struct Duplicate {
    std::size_t index;
    int first, second;
  };
  std::vector<Duplicate> duplicates;
  for (const auto& dir : dirs) {
    MergeInput input;
    input.dir = dir;
    read_manifest(input);
    m.inputs.push_back(std::move(input));
  }
  std::set<int> splits;  // the N of every --shard K/N the manifests name
  for (const auto& in : m.inputs)
    if (in.shard) splits.insert(in.shard->count);
  const int split = splits.size() == 1 ? *splits.begin() : 0;  // 0: none, or several

  for (std::size_t k = 0; k < m.inputs.size(); ++k) {
    MergeInput& input = m.inputs[k];
    const fs::path file = input.dir / "units.journal";
    if (Journal::in_use(file))
      throw MergeError(fmt::format("{} is still being written by a running `dobudget plan` (its units.journal is "
                                   "locked); wait for that run to finish, then merge",
                                   input.dir.string()));
    const std::string text = fs::exists(file) ? read_file(file) : std::string();
    std::size_t intact = 0;
    bool torn = false;
    std::map<std::size_t, std::vector<RunRecord>> records;
    try {
      // The header must name this study; every record must be intact and hold its unit's rows.
      records = Journal::parse_file(text, hash, &intact, &torn, file.string(),
                                    [&](std::size_t index, const std::vector<RunRecord>& rows) {
                                      return unit_rows_problem(m.study, units, index, rows);
                                    });
    } catch (const InputError& e) {
      if (e.line <= 1) throw MergeError(e.what());
      throw MergeError(fmt::format("{}. Delete that line, run that directory's plan command again to compute its "
                                   "unit ({}), then merge",
                                   e.what(), resume_command(input)));
    }
    if (!input.shard) input.shard = infer_shard(records, split);
    if (torn)
      throw MergeError(fmt::format(
          "{} ends with a torn record (the run writing it was interrupted): resume that run first by running its "
          "command again ({}), which drops the torn record and computes that unit again; then merge",
          file.string(), resume_command(input)));
    for (auto& [index, rows] : records) {
      if (owner[index] >= 0) {
        duplicates.push_back({index, owner[index], static_cast<int>(k)});
        continue;
      }
      owner[index] = static_cast<int>(k);
      unit_rows[index] = std::move(rows);
    }
    input.units = records.size();
  }

  // Together, every unit exactly once.
  if (!duplicates.empty()) {
    const Duplicate& d = duplicates.front();
    throw MergeError(duplicate_message(d.index, units[d.index], m.inputs[static_cast<std::size_t>(d.first)],
                                       m.inputs[static_cast<std::size_t>(d.second)], duplicates.size() - 1,
                                       units.size()));
  }
  for (int o : owner)
    if (o < 0) throw MergeError(missing_message(owner, units, m.inputs, split));

  m.journal = Journal::header(hash);
  for (std::size_t i = 0; i < units.size(); ++i) {
    m.journal += Journal::record(i, unit_rows[i]);
    m.rows.insert(m.rows.end(), unit_rows[i].begin(), unit_rows[i].end());
  }
  // Every record was checked against its unit and every unit is present once: the full, consistent
  // set of rows (a failure here is a bug, not the user's input).
  try {
    check_rows_against_study(m.study, m.rows, (out / "runs.csv").string());
  } catch (const InputError& e) {
    throw std::logic_error(std::string("the merged rows are inconsistent: ") + e.what());
  }
  m.answers = compute_study_answers(m.study, m.rows);
  m.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  return m;
}

void write_merge(const Merge& m, const fs::path& out) {
  const auto start = std::chrono::steady_clock::now();
  claim_directory(out, m.resolved_yaml);
  write_file_atomically(out / "units.journal", m.journal);
  write_run_tables(out, m.rows);
  write_answer_files(out, m.study, m.answers);

  nlohmann::ordered_json j = manifest_base(m.study, m.resolved_yaml);
  nlohmann::ordered_json from = nlohmann::ordered_json::array();
  double input_seconds = 0.0;
  bool all_timed = true;
  for (const auto& in : m.inputs) {
    nlohmann::ordered_json e;
    e["directory"] = in.dir.string();
    e["shard"] = in.shard ? nlohmann::ordered_json(shard_text(*in.shard)) : nlohmann::ordered_json();
    e["units"] = in.units;
    e["wall_seconds"] = in.wall_seconds ? nlohmann::ordered_json(*in.wall_seconds) : nlohmann::ordered_json();
    if (in.wall_seconds) input_seconds += *in.wall_seconds;
    else all_timed = false;
    from.push_back(std::move(e));
  }
  j["merged_from"] = std::move(from);
  j["units_in_this_directory"] = m.units;
  j["complete"] = true;
  j["inputs_wall_seconds"] = all_timed ? nlohmann::ordered_json(input_seconds) : nlohmann::ordered_json();
  j["wall_seconds"] = m.seconds + std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  j["finished_utc"] = utc_timestamp();
  write_file_atomically(out / "manifest.json", j.dump(2) + "\n");
}

Merge merge_run_directories(const std::vector<fs::path>& inputs, const fs::path& out) {
  Merge m = prepare_merge(inputs, out);
  write_merge(m, out);
  return m;
}

}  // namespace dobudget::io
