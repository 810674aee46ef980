// End-to-end checks of resuming `dobudget plan` (issue 5; docs/clusters.md, "Resume, pre-emption, time limits"): a run killed part-way
// (SIGKILL) or interrupted (SIGINT) and run again computes only what is missing and ends with the
// same runs.csv and answer.csv as an uninterrupted run; a torn last journal record is dropped and
// its unit computed again; a damaged record before the last is an error. Hardening: a flipped bit
// anywhere in a record (its unit index included), a record holding another unit's rows, and a
// journal of another study are refused with exit code 2 and nothing written; so are a symbolic
// link named units.journal (nothing is written through it) and a pipe (refused at once, not waited
// on); of two plans racing for one new directory exactly one claims it.
#include <catch2/catch.hpp>
#include <sys/stat.h>
#include <unistd.h>

#include <csignal>

#include "cli_harness.hpp"
#include "io/journal.hpp"
#include "io/run_directory.hpp"

using namespace cli_test;

namespace {

namespace fs = std::filesystem;

// 80 units of a few tens of milliseconds each: long enough to stop part-way, short enough for
// the whole test to take a few seconds.
const char* medium_study = R"(name: medium
seed: 11
environment: { states: 3, actions: 2, observations: 2, horizon: 5, draws: 4,
               dynamics_concentration: 0.2, observation_noise: 0.1 }
logging: { privilege: 1.0, temperature: 0.1 }
budgets: { logged: [0, 200], pilot: [10, 40] }
replicates: 20
fit: { restarts: 2, max_iterations: 60 }
evaluation: { trajectories: 200 }
targets: { model_kl: 0.05 }
)";
constexpr std::size_t medium_units = 4 * 20;

// tiny_study cut to one unit (one draw, one replicate, one budget pair): quick to run many times.
const char* one_unit_study = R"(name: one-unit
seed: 7
environment: { states: 3, actions: 2, observations: 2, horizon: 4, draws: 1,
               dynamics_concentration: 0.2, observation_noise: 0.1 }
logging: { privilege: 1.0, temperature: 0.1 }
budgets: { logged: [60], pilot: [5] }
replicates: 1
fit: { restarts: 2, max_iterations: 40 }
evaluation: { trajectories: 50 }
targets: { model_kl: 0.05 }
)";

// What plan's last line says of units found finished in the journal.
std::string fmt_resumed(std::size_t n) { return "(" + std::to_string(n) + " resumed)"; }

}  // namespace

TEST_CASE("resume: a run killed part-way (SIGKILL) resumes and ends identical to an uninterrupted run",
          "[cli][resume][kill]") {
  Scratch s("kill");
  write(s / "study.yaml", medium_study);
  const Result ref = run("plan " + (s / "study.yaml").string() + " --quiet --threads 2 --out " + (s / "ref").string());
  INFO(ref.out);
  REQUIRE(ref.code == 0);

  const std::vector<std::string> args{"plan", (s / "study.yaml").string(), "--quiet", "--threads", "1",
                                      "--out", (s / "run").string()};
  const fs::path journal = s / "run" / "units.journal";
  const pid_t pid = spawn(args, s / "killed.log");
  const bool started = wait_for_units(pid, journal, 1);
  ::kill(pid, SIGKILL);
  const Exit e = wait_for(pid);
  INFO(slurp(s / "killed.log"));
  REQUIRE(started);
  CHECK(e.signalled);
  CHECK(e.code == SIGKILL);
  const auto [done, torn] = journal_state(journal);
  INFO(done << " units finished before the kill" << (torn ? ", last record torn" : ""));
  REQUIRE(done >= 1);
  REQUIRE(done < medium_units);  // otherwise the study is too quick to test a kill part-way
  CHECK_FALSE(fs::exists(s / "run" / "runs.csv"));

  std::string again = "plan";
  for (std::size_t i = 1; i < args.size(); ++i) again += " " + args[i];
  const Result r = run(again);
  INFO(r.out);
  REQUIRE(r.code == 0);
  CHECK(r.out.find(fmt_resumed(done)) != std::string::npos);
  if (torn) CHECK(r.out.find("torn") != std::string::npos);
  CHECK(slurp(s / "run" / "runs.csv") == slurp(s / "ref" / "runs.csv"));
  CHECK(slurp(s / "run" / "answer.csv") == slurp(s / "ref" / "answer.csv"));
  CHECK(journal_state(journal) == std::pair<std::size_t, bool>{medium_units, false});
}

TEST_CASE("resume: SIGINT stops cleanly with exit code 130 after recording finished units, and says how to resume",
          "[cli][resume][interrupt]") {
  Scratch s("interrupt");
  write(s / "study.yaml", medium_study);
  const std::vector<std::string> args{"plan", (s / "study.yaml").string(), "--threads", "1", "--out",
                                      (s / "run").string()};
  const fs::path journal = s / "run" / "units.journal";
  const pid_t pid = spawn(args, s / "interrupted.log");
  const bool started = wait_for_units(pid, journal, 1);
  ::kill(pid, SIGINT);
  const Exit e = wait_for(pid);
  const std::string log = slurp(s / "interrupted.log");
  INFO(log);
  REQUIRE(started);
  CHECK_FALSE(e.signalled);
  CHECK(e.code == 130);
  const auto [done, torn] = journal_state(journal);
  CHECK_FALSE(torn);  // finished units are flushed whole, no unit is left half-written
  REQUIRE(done < medium_units);
  CHECK(log.find("stopped: " + std::to_string(done) + " of " + std::to_string(medium_units) + " units are finished") !=
        std::string::npos);
  CHECK(log.find("Run the same command again") != std::string::npos);
  CHECK_FALSE(fs::exists(s / "run" / "runs.csv"));

  std::string again = "plan --quiet";
  for (std::size_t i = 1; i < args.size(); ++i) again += " " + args[i];
  const Result r = run(again);
  INFO(r.out);
  REQUIRE(r.code == 0);
  CHECK(r.out.find(fmt_resumed(done)) != std::string::npos);
  const std::string runs = slurp(s / "run" / "runs.csv");
  CHECK(std::count(runs.begin(), runs.end(), '\n') == 1 + static_cast<long>(medium_units) * 3 * 2 * 2);
}

TEST_CASE("resume: a torn last journal record is dropped and its unit computed again", "[cli][resume][journal]") {
  Scratch s("torn");
  write(s / "study.yaml", tiny_study);
  const std::string cmd = "plan " + (s / "study.yaml").string() + " --quiet --out " + (s / "run").string();
  REQUIRE(run(cmd).code == 0);
  const fs::path journal = s / "run" / "units.journal";
  const std::string runs = slurp(s / "run" / "runs.csv"), answer = slurp(s / "run" / "answer.csv");
  const std::vector<std::string> records = lines(slurp(journal));
  REQUIRE(records.size() == 7);  // the header and 6 units
  const std::vector<std::string> first_five(records.begin(), records.end() - 1);  // with the header

  SECTION("the last record cut in half, without its end of line (killed while writing)") {
    write(journal, join_lines(first_five) + records.back().substr(0, records.back().size() / 2));
  }
  SECTION("the last record's checksum corrupted") {
    std::string last = records.back();
    const auto crc = last.find('\t') + 1;
    last[crc] = last[crc] == 'a' ? 'b' : 'a';
    write(journal, join_lines(first_five) + last + "\n");
  }
  const Result r = run(cmd);
  INFO(r.out);
  REQUIRE(r.code == 0);
  CHECK(r.out.find("torn") != std::string::npos);
  CHECK(r.out.find("(5 resumed)") != std::string::npos);
  CHECK(slurp(s / "run" / "runs.csv") == runs);
  CHECK(slurp(s / "run" / "answer.csv") == answer);
  CHECK(journal_state(journal) == std::pair<std::size_t, bool>{6, false});
}

TEST_CASE("resume: a damaged journal record before the last is an error naming the file and the record",
          "[cli][resume][journal]") {
  Scratch s("damaged");
  write(s / "study.yaml", tiny_study);
  const std::string cmd = "plan " + (s / "study.yaml").string() + " --quiet --out " + (s / "run").string();
  REQUIRE(run(cmd).code == 0);
  const fs::path journal = s / "run" / "units.journal";
  std::vector<std::string> records = lines(slurp(journal));
  REQUIRE(records.size() == 7);  // the header and 6 units
  records[2].pop_back();         // the second record (line 3) loses its last character
  const std::string damaged = join_lines(records);
  write(journal, damaged);
  const std::string runs = slurp(s / "run" / "runs.csv");

  const Result r = run(cmd);
  INFO(r.out);
  CHECK(r.code == 2);
  CHECK(r.out.find(journal.string() + ":3: damaged record") != std::string::npos);
  CHECK(slurp(journal) == damaged);  // left as it was, for the user to look at
  CHECK(slurp(s / "run" / "runs.csv") == runs);
}

namespace {

// A finished tiny run in s/run, its journal's lines (the header first) and its runs.csv.
struct TinyRun {
  std::string cmd;
  fs::path journal;
  std::vector<std::string> records;
  std::string runs;
};

TinyRun tiny_run(const Scratch& s) {
  write(s / "study.yaml", tiny_study);
  TinyRun t;
  // One thread: the records come in unit order.
  t.cmd = "plan " + (s / "study.yaml").string() + " --quiet --threads 1 --out " + (s / "run").string();
  const Result r = run(t.cmd);
  INFO(r.out);
  REQUIRE(r.code == 0);
  t.journal = s / "run" / "units.journal";
  t.records = lines(slurp(t.journal));
  REQUIRE(t.records.size() == 7);
  t.runs = slurp(s / "run" / "runs.csv");
  return t;
}

}  // namespace

TEST_CASE("resume: a flipped bit in a record's unit index or any field is refused, not trusted",
          "[cli][resume][journal]") {
  // The reproduced bug: a bit flipped in the unit index passed the checksum (which covered only the
  // payload), and plan wrote runs.csv with one unit twice and another missing, then exited 1.
  Scratch s("flipped");
  const TinyRun t = tiny_run(s);
  const std::string& rec = t.records[2];  // unit 1 (line 3)
  REQUIRE(rec.rfind("1\t", 0) == 0);
  const std::size_t t1 = rec.find('\t'), t2 = rec.find('\t', t1 + 1);
  // One byte each of the index, the checksum, a key cell and a measure of the payload.
  for (const std::size_t at : {std::size_t{0}, t1 + 3, t2 + 1, rec.size() - 5}) {
    std::vector<std::string> flipped = t.records;
    flipped[2][at] = static_cast<char>(flipped[2][at] ^ 0x02);  // '1' <-> '3' in the index
    const std::string damaged = join_lines(flipped);
    write(t.journal, damaged);
    const Result r = run(t.cmd);
    INFO("byte " << at << "\n" << r.out);
    CHECK(r.code == 2);
    CHECK(r.out.find(t.journal.string() + ":3: damaged record") != std::string::npos);
    CHECK(slurp(t.journal) == damaged);              // left as it was, for the user to look at
    CHECK(slurp(s / "run" / "runs.csv") == t.runs);  // never a runs.csv that is not the study's rows
  }
  // Deleting the line, as the message says, has the unit computed again.
  std::vector<std::string> without = t.records;
  without.erase(without.begin() + 2);
  write(t.journal, join_lines(without));
  const Result r = run(t.cmd);
  INFO(r.out);
  CHECK(r.code == 0);
  CHECK(r.out.find("(5 resumed)") != std::string::npos);
  CHECK(slurp(s / "run" / "runs.csv") == t.runs);
}

TEST_CASE("resume: a record whose rows belong to another unit is refused with its line", "[cli][resume][journal]") {
  Scratch s("foreign-record");
  const TinyRun t = tiny_run(s);
  std::size_t intact = 0;
  bool torn = false;
  const auto units = dobudget::io::Journal::parse(slurp(t.journal), &intact, &torn);
  REQUIRE(units.size() == 6);
  // Intact checksums, rows of the wrong units: unit 4's rows recorded as unit 1 and the reverse.
  std::vector<std::string> swapped = t.records;
  for (std::size_t line = 1; line < swapped.size(); ++line) {
    const std::size_t index = std::stoul(swapped[line].substr(0, swapped[line].find('\t')));
    if (index == 1 || index == 4) {
      std::string rec = dobudget::io::Journal::record(index, units.at(5 - index));
      rec.pop_back();
      swapped[line] = rec;
    }
  }
  write(t.journal, join_lines(swapped));
  const Result r = run(t.cmd);
  INFO(r.out);
  CHECK(r.code == 2);
  // Whichever of the two records comes first in the journal (units finish in any order) is named.
  CHECK((r.out.find("the record of unit 1 does not belong to it") != std::string::npos ||
         r.out.find("the record of unit 4 does not belong to it") != std::string::npos));
  CHECK(r.out.find(t.journal.string() + ":") != std::string::npos);
  CHECK(slurp(s / "run" / "runs.csv") == t.runs);
}

TEST_CASE("resume: a journal of another study, or without its header, is refused", "[cli][resume][journal]") {
  Scratch s("foreign-journal");
  const TinyRun t = tiny_run(s);
  write(s / "other.yaml", std::string(tiny_study) + "assurance: 0.9\n");
  REQUIRE(run("plan " + (s / "other.yaml").string() + " --quiet --out " + (s / "other").string()).code == 0);

  const std::string foreign = slurp(s / "other" / "units.journal");
  write(t.journal, foreign);
  Result r = run(t.cmd);
  INFO(r.out);
  CHECK(r.code == 2);
  CHECK(r.out.find(t.journal.string() + ":1: belongs to another study") != std::string::npos);
  CHECK(r.out.find(dobudget::io::study_hash(slurp(s / "run" / "study.resolved.yaml"))) != std::string::npos);
  CHECK(slurp(t.journal) == foreign);
  CHECK(slurp(s / "run" / "runs.csv") == t.runs);

  const std::vector<std::string> headerless(t.records.begin() + 1, t.records.end());  // as dobudget 1 wrote it
  write(t.journal, join_lines(headerless));
  r = run(t.cmd);
  INFO(r.out);
  CHECK(r.code == 2);
  CHECK(r.out.find(t.journal.string() + ":1: has no journal header") != std::string::npos);
}

TEST_CASE("resume: of two plans of different studies started together on one new directory, exactly one wins",
          "[cli][resume][race]") {
  // The reproduced bug: in 7-10% of tries one process wrote its units under the other study's
  // study.resolved.yaml. 60 tries: were the bug back, all would pass with probability at most
  // 0.93^60 = 1.3% (20 tries let it through 12-23% of the time). One-unit studies, so that the
  // tries take a few seconds.
  Scratch s("race");
  const std::vector<std::string> names{"a", "b"};
  write(s / "a.yaml", one_unit_study);
  std::string b = one_unit_study;
  b.replace(b.find("seed: 7"), 7, "seed: 8");  // other rows
  write(s / "b.yaml", b);
  std::vector<std::string> ref_runs, ref_resolved;
  for (const auto& n : names) {
    const Result r = run("plan " + (s / (n + ".yaml")).string() + " --quiet --threads 1 --out " + (s / ("ref-" + n)).string());
    INFO(r.out);
    REQUIRE(r.code == 0);
    ref_runs.push_back(slurp(s / ("ref-" + n) / "runs.csv"));
    ref_resolved.push_back(slurp(s / ("ref-" + n) / "study.resolved.yaml"));
  }
  REQUIRE(ref_runs[0] != ref_runs[1]);

  int a_won = 0, b_won = 0;
  constexpr int tries = 60;
  for (int trial = 0; trial < tries; ++trial) {
    const fs::path out = s / ("race-" + std::to_string(trial));
    std::vector<pid_t> pids;
    for (const auto& n : names)
      pids.push_back(spawn({"plan", (s / (n + ".yaml")).string(), "--quiet", "--threads", "1", "--out", out.string()},
                           s / (n + ".log")));
    std::vector<Exit> exits;
    for (pid_t p : pids) exits.push_back(wait_for(p));
    const std::string log_a = slurp(s / "a.log"), log_b = slurp(s / "b.log");
    INFO("trial " << trial << "\na: " << log_a << "\nb: " << log_b);
    REQUIRE_FALSE(exits[0].signalled);
    REQUIRE_FALSE(exits[1].signalled);
    REQUIRE(((exits[0].code == 0 && exits[1].code == 2) || (exits[0].code == 2 && exits[1].code == 0)));
    const std::size_t winner = exits[0].code == 0 ? 0 : 1;
    (winner == 0 ? a_won : b_won)++;
    const std::string& loser_log = winner == 0 ? log_b : log_a;
    CHECK(loser_log.find("error: " + out.string()) != std::string::npos);  // names the directory
    // The winner's directory holds its study and only its study's rows.
    CHECK(slurp(out / "study.resolved.yaml") == ref_resolved[winner]);
    CHECK(slurp(out / "runs.csv") == ref_runs[winner]);
    // And `answer` accepts it as a finished run of that study.
    CHECK(run("answer " + out.string()).code == 0);
  }
  INFO("a won " << a_won << ", b won " << b_won);
  CHECK(a_won + b_won == tries);
}

TEST_CASE("resume: a symbolic link or a pipe named units.journal is refused at once, nothing written through it",
          "[cli][resume][journal]") {
  // The reproduced bugs: with `ln -s victim units.journal`, plan appended the header and every record
  // to the victim and exited 0; with a pipe (mkfifo) it blocked in open(2), deaf to SIGTERM.
  Scratch s("journal-kind");
  write(s / "study.yaml", tiny_study);
  const fs::path victim = s / "victim";
  write(victim, "");
  fs::create_directories(s / "sym");
  fs::create_symlink(victim, s / "sym" / "units.journal");
  Result r = run_within(60, "plan " + (s / "study.yaml").string() + " --quiet --out " + (s / "sym").string());
  INFO(r.out);
  CHECK(r.code == 2);
  CHECK(r.out.find("error: " + (s / "sym" / "units.journal").string() + ": is a symbolic link") != std::string::npos);
  CHECK(slurp(victim).empty());
  CHECK_FALSE(fs::exists(s / "sym" / "study.resolved.yaml"));  // nothing half-written either
  CHECK_FALSE(fs::exists(s / "sym" / "runs.csv"));

  fs::create_directories(s / "fifo");
  REQUIRE(::mkfifo((s / "fifo" / "units.journal").c_str(), 0644) == 0);
  r = run_within(20, "plan " + (s / "study.yaml").string() + " --quiet --out " + (s / "fifo").string());
  INFO(r.out);
  CHECK(r.code == 2);  // not 137: it did not hang until killed
  CHECK(r.out.find("error: " + (s / "fifo" / "units.journal").string() + ": is not a regular file but a pipe (FIFO)") !=
        std::string::npos);
  CHECK_FALSE(fs::exists(s / "fifo" / "study.resolved.yaml"));
}
