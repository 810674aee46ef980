// End-to-end checks of resuming `dobudget plan` (issue 5; design.md sec. 6): a run killed part-way
// (SIGKILL) or interrupted (SIGINT) and run again computes only what is missing and ends with the
// same runs.csv and answer.csv as an uninterrupted run; a torn last journal record is dropped and
// its unit computed again; a damaged record before the last is an error.
#include <catch2/catch.hpp>
#include <fcntl.h>
#include <spawn.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <csignal>
#include <thread>

#include "cli_harness.hpp"
#include "io/journal.hpp"

extern char** environ;

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

// Starts the binary with `args`, stdout and stderr to `log`; returns its process id.
pid_t spawn(const std::vector<std::string>& args, const fs::path& log) {
  std::vector<std::string> all{DOBUDGET_BINARY};
  all.insert(all.end(), args.begin(), args.end());
  std::vector<char*> argv;
  for (auto& a : all) argv.push_back(a.data());
  argv.push_back(nullptr);
  posix_spawn_file_actions_t actions;
  posix_spawn_file_actions_init(&actions);
  posix_spawn_file_actions_addopen(&actions, 1, log.c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0644);
  posix_spawn_file_actions_adddup2(&actions, 1, 2);
  pid_t pid = -1;
  const int rc = posix_spawn(&pid, DOBUDGET_BINARY, &actions, nullptr, argv.data(), environ);
  posix_spawn_file_actions_destroy(&actions);
  REQUIRE(rc == 0);
  return pid;
}

std::size_t finished_records(const fs::path& journal) {
  if (!fs::exists(journal)) return 0;
  const std::string text = slurp(journal);
  return static_cast<std::size_t>(std::count(text.begin(), text.end(), '\n'));
}

// Waits until `journal` holds at least one finished unit (the child still running); false if the
// child ended first or nothing came within 60 s.
bool wait_for_first_unit(pid_t pid, const fs::path& journal) {
  const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(60);
  while (std::chrono::steady_clock::now() < deadline) {
    if (finished_records(journal) >= 1) return true;
    int status = 0;
    if (::waitpid(pid, &status, WNOHANG) == pid) return false;
    std::this_thread::sleep_for(std::chrono::milliseconds(2));
  }
  return false;
}

struct Exit {
  bool signalled = false;
  int code = -1;  // exit code, or signal number when signalled
};

Exit wait_for(pid_t pid) {
  int status = 0;
  ::waitpid(pid, &status, 0);
  if (WIFSIGNALED(status)) return {true, WTERMSIG(status)};
  return {false, WIFEXITED(status) ? WEXITSTATUS(status) : -1};
}

// Units intact in a journal, and whether its last record is torn.
std::pair<std::size_t, bool> journal_state(const fs::path& journal) {
  std::size_t intact = 0;
  bool torn = false;
  const auto units = dobudget::io::Journal::parse(slurp(journal), &intact, &torn);
  return {units.size(), torn};
}

// What plan's last line says of units found finished in the journal.
std::string fmt_resumed(std::size_t n) { return "(" + std::to_string(n) + " resumed)"; }

std::vector<std::string> lines(const std::string& text) {
  std::vector<std::string> out;
  std::size_t pos = 0;
  while (pos < text.size()) {
    const auto nl = text.find('\n', pos);
    out.push_back(text.substr(pos, nl - pos));
    pos = nl == std::string::npos ? text.size() : nl + 1;
  }
  return out;
}

std::string join_lines(const std::vector<std::string>& ls) {
  std::string s;
  for (const auto& l : ls) s += l + "\n";
  return s;
}

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
  const bool started = wait_for_first_unit(pid, journal);
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
  const bool started = wait_for_first_unit(pid, journal);
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
  REQUIRE(records.size() == 6);
  const std::vector<std::string> first_five(records.begin(), records.end() - 1);

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
  REQUIRE(records.size() == 6);
  records[1].pop_back();  // record 2 loses its last character
  const std::string damaged = join_lines(records);
  write(journal, damaged);
  const std::string runs = slurp(s / "run" / "runs.csv");

  const Result r = run(cmd);
  INFO(r.out);
  CHECK(r.code == 2);
  CHECK(r.out.find(journal.string() + ": record 2 (line 2) is damaged") != std::string::npos);
  CHECK(slurp(journal) == damaged);  // left as it was, for the user to look at
  CHECK(slurp(s / "run" / "runs.csv") == runs);
}
