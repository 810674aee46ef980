// Helpers for end-to-end tests of the dobudget binary: run a command line, capture its output
// and exit code, make scratch directories, read files.
#pragma once
#include <sys/wait.h>

#include <cstdio>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>

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
