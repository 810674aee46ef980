// Helpers for end-to-end tests of the dobudget binary: run a command line, capture its output
// and exit code, start it in the background and wait for it, make scratch directories, read
// files, split them into lines, read a run directory's journal.
#pragma once
#include <catch2/catch.hpp>
#include <fcntl.h>
#include <spawn.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>
#include <thread>
#include <utility>
#include <vector>

#include "io/journal.hpp"

extern char** environ;

namespace cli_test {

struct Result {
  int code = -1;
  std::string out;  // stdout and stderr together
};

// Runs a shell command line, stdout and stderr together.
inline Result run_command(const std::string& command_line) {
  const std::string cmd = command_line + " 2>&1";
  Result r;
  FILE* p = popen(cmd.c_str(), "r");
  char buf[4096];
  std::size_t n;
  while ((n = fread(buf, 1, sizeof buf, p)) > 0) r.out.append(buf, n);
  const int status = pclose(p);
  r.code = WIFEXITED(status) ? WEXITSTATUS(status) : -1;
  return r;
}

// Runs dobudget with these arguments.
inline Result run(const std::string& args) { return run_command(std::string(DOBUDGET_BINARY) + " " + args); }

// Runs dobudget with these arguments, killed (SIGKILL, exit code 137) if it has not ended within
// `seconds`: for inputs that once made it hang, a generous bound is a functional check.
inline Result run_within(int seconds, const std::string& args) {
  return run_command("timeout -s KILL " + std::to_string(seconds) + " " + std::string(DOBUDGET_BINARY) + " " + args);
}

inline std::string slurp(const std::filesystem::path& f) {
  std::ifstream in(f, std::ios::binary);
  std::ostringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

inline void write(const std::filesystem::path& f, const std::string& text) {
  std::ofstream(f, std::ios::binary) << text;
}

// A fresh empty directory under the system temporary directory, removed by the destructor.
struct Scratch {
  std::filesystem::path dir;
  explicit Scratch(const std::string& name) {
    dir = std::filesystem::temp_directory_path() / ("dobudget-test-" + name + "-" + std::to_string(::getpid()));
    std::filesystem::remove_all(dir);
    std::filesystem::create_directories(dir);
  }
  ~Scratch() { std::filesystem::remove_all(dir); }
  std::filesystem::path operator/(const std::string& s) const { return dir / s; }
};

// The lines of a text, without their LF (a final LF ends the last line; it starts no empty one).
inline std::vector<std::string> lines(const std::string& text) {
  std::vector<std::string> out;
  std::size_t pos = 0;
  while (pos < text.size()) {
    const auto nl = text.find('\n', pos);
    out.push_back(text.substr(pos, nl - pos));
    pos = nl == std::string::npos ? text.size() : nl + 1;
  }
  return out;
}

// The inverse of lines(): each line followed by LF.
inline std::string join_lines(const std::vector<std::string>& ls) {
  std::string s;
  for (const auto& l : ls) s += l + "\n";
  return s;
}

// Starts the binary with `args` in the background, stdout and stderr to `log`; returns its process id.
inline pid_t spawn(const std::vector<std::string>& args, const std::filesystem::path& log) {
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

struct Exit {
  bool signalled = false;
  int code = -1;  // exit code, or signal number when signalled
};

// Waits for a spawned process to end.
inline Exit wait_for(pid_t pid) {
  int status = 0;
  ::waitpid(pid, &status, 0);
  if (WIFSIGNALED(status)) return {true, WTERMSIG(status)};
  return {false, WIFEXITED(status) ? WEXITSTATUS(status) : -1};
}

// Units intact in a journal, and whether its last record is torn.
inline std::pair<std::size_t, bool> journal_state(const std::filesystem::path& journal) {
  std::size_t intact = 0;
  bool torn = false;
  const auto units = dobudget::io::Journal::parse(slurp(journal), &intact, &torn);
  return {units.size(), torn};
}

// Waits until `journal` holds at least `n` intact units while the spawned process `pid` runs; false
// if it ended first or 60 s passed.
inline bool wait_for_units(pid_t pid, const std::filesystem::path& journal, std::size_t n) {
  const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(60);
  while (std::chrono::steady_clock::now() < deadline) {
    if (std::filesystem::exists(journal) && journal_state(journal).first >= n) return true;
    int status = 0;
    if (::waitpid(pid, &status, WNOHANG) == pid) return false;
    std::this_thread::sleep_for(std::chrono::milliseconds(2));
  }
  return false;
}

// A study small enough to run in about a second.
inline const char* tiny_study = R"(name: tiny
seed: 7
environment: { states: 3, actions: 2, observations: 2, horizon: 4, draws: 2,
               dynamics_concentration: 0.2, observation_noise: 0.1 }
logging: { privilege: 1.0, temperature: 0.1 }
budgets: { logged: [0, 60], pilot: [5, 20] }
replicates: 3
fit: { restarts: 2, max_iterations: 40 }
evaluation: { trajectories: 50 }
targets: { model_kl: 0.05 }
)";

}  // namespace cli_test
