// End-to-end checks of stopping `dobudget plan` promptly (SIGTERM and SIGINT are honoured within
// about a second, not after the unit in progress) and of the limits `plan` and `check` apply
// before anything is written: the estimated cost (--max-core-hours) and the estimated memory.
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
using Clock = std::chrono::steady_clock;

// Two scenarios of one unit each. Scenario 0 (100 rollouts per evaluation) takes milliseconds;
// scenario 1 (3 million) takes about 13 s on the project's machine: about 4 s for its draw's
// reference (the true plan's value) and 8 s for its unit, nearly all in rollouts.
const char* slow_study = R"(name: stoppable
seed: 3
environment: { states: 3, actions: 2, observations: 2, horizon: 10, draws: 1 }
budgets: { logged: [0], pilot: [20] }
strategies: [pilot-only]
measures: [return_gap]
targets: { return_gap: 0.5 }
replicates: 1
fit: { restarts: 1, max_iterations: 20 }
planner: { belief_points: 20, exact_histories: 0, rollouts: 100 }
sweep:
  planner.rollouts: [100, 3000000]
)";

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

// Intact units in a journal, and whether its last record is torn.
std::pair<std::size_t, bool> journal_state(const fs::path& journal) {
  std::size_t intact = 0;
  bool torn = false;
  const auto units = dobudget::io::Journal::parse(slurp(journal), &intact, &torn);
  return {units.size(), torn};
}

// Waits until the journal holds `n` units while the child runs; false if it ended first or 60 s passed.
bool wait_for_units(pid_t pid, const fs::path& journal, std::size_t n) {
  const auto deadline = Clock::now() + std::chrono::seconds(60);
  while (Clock::now() < deadline) {
    if (fs::exists(journal) && journal_state(journal).first >= n) return true;
    int status = 0;
    if (::waitpid(pid, &status, WNOHANG) == pid) return false;
    std::this_thread::sleep_for(std::chrono::milliseconds(5));
  }
  return false;
}

int exit_code(pid_t pid) {
  int status = 0;
  ::waitpid(pid, &status, 0);
  return WIFEXITED(status) ? WEXITSTATUS(status) : -1;
}

}  // namespace

TEST_CASE("stop: SIGTERM during a long unit exits 130 at once, journals only whole units, and a rerun resumes "
          "to the runs.csv of an uninterrupted run",
          "[cli][stop]") {
  Scratch s("stop");
  cli_test::write(s / "study.yaml", slow_study);
  // The uninterrupted run goes alongside (a core each).
  const pid_t full = spawn({"plan", (s / "study.yaml").string(), "--out", (s / "full").string(), "--threads", "1",
                            "--quiet"},
                           s / "full.log");

  const pid_t cut = spawn({"plan", (s / "study.yaml").string(), "--out", (s / "cut").string(), "--threads", "1"},
                          s / "cut.log");
  REQUIRE(wait_for_units(cut, s / "cut" / "units.journal", 1));  // scenario 0's unit is in
  std::this_thread::sleep_for(std::chrono::seconds(1));           // well inside scenario 1's work
  const auto sent = Clock::now();
  REQUIRE(::kill(cut, SIGTERM) == 0);
  const int code = exit_code(cut);
  const double seconds = std::chrono::duration<double>(Clock::now() - sent).count();
  INFO(slurp(s / "cut.log"));
  CHECK(code == 130);
  // A generous bound: polls come every few microseconds of rollouts; finishing the unit in
  // progress instead would take about 12 s more.
  CHECK(seconds < 5.0);
  const auto [units, torn] = journal_state(s / "cut" / "units.journal");
  CHECK(units == 1);  // the finished unit, and nothing of the one cut short
  CHECK_FALSE(torn);
  CHECK_FALSE(fs::exists(s / "cut" / "runs.csv"));
  CHECK_THAT(slurp(s / "cut.log"), Catch::Contains("stopped: 1 of 2 units are finished"));

  const Result rerun = run("plan " + (s / "study.yaml").string() + " --out " + (s / "cut").string() + " --threads 1");
  INFO(rerun.out);
  CHECK(rerun.code == 0);
  CHECK_THAT(rerun.out, Catch::Contains("(1 resumed)"));
  REQUIRE(exit_code(full) == 0);
  CHECK(slurp(s / "cut" / "runs.csv") == slurp(s / "full" / "runs.csv"));
}

TEST_CASE("stop: SIGINT is honoured as promptly as SIGTERM", "[cli][stop]") {
  Scratch s("stop-int");
  cli_test::write(s / "study.yaml", slow_study);
  const pid_t cut = spawn({"plan", (s / "study.yaml").string(), "--out", (s / "cut").string(), "--threads", "2"},
                          s / "cut.log");
  REQUIRE(wait_for_units(cut, s / "cut" / "units.journal", 1));
  std::this_thread::sleep_for(std::chrono::milliseconds(500));
  const auto sent = Clock::now();
  REQUIRE(::kill(cut, SIGINT) == 0);
  const int code = exit_code(cut);
  CHECK(code == 130);
  CHECK(std::chrono::duration<double>(Clock::now() - sent).count() < 5.0);
  CHECK(journal_state(s / "cut" / "units.journal") == std::pair<std::size_t, bool>{1, false});
}

TEST_CASE("plan states its estimated cost at start and refuses one above --max-core-hours, writing nothing",
          "[cli][stop]") {
  Scratch s("cost-limit");
  cli_test::write(s / "tiny.yaml", tiny_study);
  const Result ok = run("plan " + (s / "tiny.yaml").string() + " --out " + (s / "run").string() + " --threads 1");
  CHECK(ok.code == 0);
  CHECK_THAT(ok.out, Catch::Matches("(.|\n)*estimated cost: about [0-9.e+-]+ core-hours \\(at most [0-9.e+-]+\\) for 6 "
                                    "units; limit 1000 \\(--max-core-hours\\)(.|\n)*"));

  // 10^5 units of 1000 restarts each: thousands of core-hours, in little memory (2 rows a unit).
  cli_test::write(s / "runaway.yaml", "name: runaway\nenvironment: { draws: 100 }\nreplicates: 1000\n"
                                      "strategies: [pilot-only]\nbudgets: { logged: [0], pilot: [10, 1000] }\n"
                                      "fit: { restarts: 1000 }\n");
  const Result refused = run("plan " + (s / "runaway.yaml").string() + " --out " + (s / "runaway").string());
  INFO(refused.out);
  CHECK(refused.code == 2);
  CHECK_THAT(refused.out, Catch::Contains("error: --max-core-hours: the estimated cost of this run, about") &&
                              Catch::Contains("is above the limit of 1000 core-hours") &&
                              Catch::Contains("raise the limit, e.g. --max-core-hours"));
  CHECK_FALSE(fs::exists(s / "runaway"));

  // A limit below the tiny study's estimate refuses it too; a bad limit is named.
  const Result low = run("plan " + (s / "tiny.yaml").string() + " --out " + (s / "low").string() + " --max-core-hours 1e-9");
  CHECK(low.code == 2);
  CHECK_FALSE(fs::exists(s / "low"));
  for (const std::string bad : {"0", "-1", "abc", "inf"}) {
    const Result r = run("plan " + (s / "tiny.yaml").string() + " --out " + (s / "bad").string() + " --max-core-hours " + bad);
    INFO(r.out);
    CHECK(r.code == 2);
    CHECK_THAT(r.out, Catch::Contains("error: --max-core-hours: "));
    CHECK_FALSE(fs::exists(s / "bad"));
  }
}

TEST_CASE("check and plan refuse a study whose estimated memory exceeds the machine's, naming the keys", "[cli][stop]") {
  Scratch s("memory-limit");
  // Two units at once of 10^7 pilot episodes of horizon 5000: about 800 GB of data.
  cli_test::write(s / "huge.yaml", "name: huge\nenvironment: { horizon: 5000 }\nbudgets: { pilot: [5, 10000000] }\n");
  for (const std::string command : {"check", "plan"}) {
    const Result r =
        run(command + " " + (s / "huge.yaml").string() + (command == "plan" ? " --out " + (s / "run").string() : ""));
    INFO(r.out);
    CHECK(r.code == 2);
    CHECK_THAT(r.out, Catch::Contains("huge.yaml: budgets.pilot: the estimated peak memory") &&
                          Catch::Contains("driven by budgets.pilot, budgets.logged, environment.horizon"));
    CHECK_FALSE(fs::exists(s / "run"));
  }
  // check prints the estimate of a study it accepts.
  cli_test::write(s / "tiny.yaml", tiny_study);
  const Result ok = run("check " + (s / "tiny.yaml").string());
  CHECK(ok.code == 0);
  CHECK_THAT(ok.out, Catch::Contains("# estimated peak memory: ") && Catch::Contains("# cost from counts"));
}

TEST_CASE("extreme numbers: a reward of 1e308 and a budget of 2^31 - 1 are refused, never a crash or a negative cost",
          "[cli][stop]") {
  Scratch s("extreme");
  const std::string model = "  model:\n    states: 2\n    actions: 2\n    observations: 2\n    initial: [0.5, 0.5]\n"
                            "    transitions:\n      - - [0.9, 0.1]\n        - [0.2, 0.8]\n      - - [0.5, 0.5]\n"
                            "        - [0.5, 0.5]\n    emissions:\n      - [0.8, 0.2]\n      - [0.3, 0.7]\n"
                            "    rewards: [0, 1e308]\n";
  cli_test::write(s / "reward.yaml", "name: reward\nmeasures: [model_kl, return_gap]\ntargets: { return_gap: 0.1 }\n"
                                     "environment:\n" + model);
  for (const std::string command : {"check", "plan"}) {
    const Result r = run(command + " " + (s / "reward.yaml").string() + (command == "plan" ? " --out " + (s / "r").string() : ""));
    INFO(r.out);
    CHECK(r.code == 2);
    CHECK_THAT(r.out, Catch::Contains("reward.yaml:18: environment.model.rewards[1]: must be at most 1e+100"));
  }
  cli_test::write(s / "budget.yaml", "name: budget\nbudgets: { pilot: [5, 2147483647] }\n");
  const Result b = run("check " + (s / "budget.yaml").string());
  CHECK(b.code == 2);
  CHECK_THAT(b.out, Catch::Contains("budget.yaml:2: budgets.pilot[1]: must be at most 10000000 episodes"));
  CHECK_THAT(b.out, !Catch::Contains("core-hours"));
}
