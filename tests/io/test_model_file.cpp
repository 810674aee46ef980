// The model file: reading with located errors, and writing that round-trips bit for bit.
#include <catch2/catch.hpp>

#include "input_error_of.hpp"

#include "temp_dir.hpp"

#include <atomic>
#include <chrono>
#include <cmath>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <functional>
#include <random>
#include <string>
#include <vector>

#include "io/input_error.hpp"
#include "io/model_file.hpp"

namespace fs = std::filesystem;
using dobudget::Environment;
using dobudget::Matrix;
using dobudget::Vector;
using dobudget::io::InputError;
using dobudget::io::load_model;
using dobudget::io::model_yaml;

namespace {

using dobudget::test::TempDir;

template <class A, class B>
void require_same_bits(const A& a, const B& b) {
  REQUIRE(a.rows() == b.rows());
  REQUIRE(a.cols() == b.cols());
  if (a.size() > 0) REQUIRE(std::memcmp(a.data(), b.data(), sizeof(double) * a.size()) == 0);
}

using dobudget::test::error_of;

// A random probability row with awkward entries (thirds, tiny numbers, exact zeros).
Vector random_row(int n, std::mt19937_64& rng) {
  std::uniform_real_distribution<double> u(0.0, 1.0);
  Vector v(n);
  for (int i = 0; i < n; ++i) v(i) = u(rng);
  if (n > 2) v(1) = 1e-300, v(2) = 0.0;
  v /= v.sum();
  return v;
}

Environment random_environment(int S, int A, int O, bool with_logging_policy, std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  Environment env;
  auto& m = env.model;
  m.states = S, m.actions = A, m.observations = O;
  m.initial = random_row(S, rng);
  for (int a = 0; a < A; ++a) {
    Matrix t(S, S);
    for (int s = 0; s < S; ++s) t.row(s) = random_row(S, rng).transpose();
    m.transitions.push_back(t);
  }
  m.emissions = Matrix(S, O);
  for (int s = 0; s < S; ++s) m.emissions.row(s) = random_row(O, rng).transpose();
  m.rewards = Vector(O);
  std::normal_distribution<double> n(0.0, 1.0);
  for (int o = 0; o < O; ++o) m.rewards(o) = n(rng) / 3.0;
  m.rewards(0) = -0.0;
  if (O > 1) m.rewards(1) = 4.9406564584124654e-324;  // the smallest subnormal
  if (O > 2) m.rewards(2) = -1e100;  // the largest |reward| a model may hold (model_file.hpp)
  if (with_logging_policy) {
    env.logging_policy = Matrix(S, A);
    for (int s = 0; s < S; ++s) env.logging_policy.row(s) = random_row(A, rng).transpose();
  }
  return env;
}

// A valid model (2 states, 2 actions, 3 observations); line numbers as in the comments.
const std::vector<std::string> base_lines{
    "states: 2",              // 1
    "actions: 2",             // 2
    "observations: 3",        // 3
    "initial: [0.5, 0.5]",    // 4
    "transitions:",           // 5
    "  - - [0.9, 0.1]",       // 6
    "    - [0.2, 0.8]",       // 7
    "  - - [0.5, 0.5]",       // 8
    "    - [0.5, 0.5]",       // 9
    "emissions:",             // 10
    "  - [0.7, 0.2, 0.1]",    // 11
    "  - [0.1, 0.1, 0.8]",    // 12
    "rewards: [0, 0.5, 1]",   // 13
    "logging_policy:",        // 14
    "  - [0.9, 0.1]",         // 15
    "  - [0.1, 0.9]",         // 16
};

std::string join_lines(const std::vector<std::string>& lines) {
  std::string s;
  for (const auto& l : lines) s += l + "\n";
  return s;
}

// The base model with line `line` (1-based) replaced by `text` (or removed when text is empty).
std::string base_with(int line, const std::string& text) {
  std::vector<std::string> lines = base_lines;
  if (text.empty()) lines.erase(lines.begin() + (line - 1));
  else lines[line - 1] = text;
  return join_lines(lines);
}

}  // namespace

TEST_CASE("model_yaml then load_model reproduces every matrix bit for bit", "[model_file]") {
  TempDir dir;
  for (const bool with_policy : {true, false}) {
    const Environment env = random_environment(4, 3, 5, with_policy, with_policy ? 7 : 8);
    const std::string text = model_yaml(env);
    const fs::path file = dir.write(with_policy ? "with.yaml" : "without.yaml", text);
    const Environment back = load_model(file, 6, 0.95);
    CHECK(back.model.states == 4);
    CHECK(back.model.actions == 3);
    CHECK(back.model.observations == 5);
    CHECK(back.model.horizon == 6);
    CHECK(back.model.discount == 0.95);
    require_same_bits(back.model.initial, env.model.initial);
    REQUIRE(back.model.transitions.size() == env.model.transitions.size());
    for (std::size_t a = 0; a < env.model.transitions.size(); ++a)
      require_same_bits(back.model.transitions[a], env.model.transitions[a]);
    require_same_bits(back.model.emissions, env.model.emissions);
    require_same_bits(back.model.rewards, env.model.rewards);
    require_same_bits(back.logging_policy, env.logging_policy);
    CHECK(std::signbit(back.model.rewards(0)));
    if (!with_policy) CHECK(back.logging_policy.size() == 0);
    CHECK(model_yaml(back) == text);  // deterministic, and a fixed point
  }
}

TEST_CASE("model files read as written, with the optional logging policy", "[model_file]") {
  TempDir dir;
  const Environment with = load_model(dir.write("m.yaml", join_lines(base_lines)), 8, 1.0);
  CHECK(with.model.initial(0) == 0.5);
  CHECK(with.model.transitions[0](1, 0) == 0.2);
  CHECK(with.model.emissions(1, 2) == 0.8);
  CHECK(with.model.rewards(1) == 0.5);
  REQUIRE(with.logging_policy.rows() == 2);
  CHECK(with.logging_policy(1, 1) == 0.9);

  std::vector<std::string> lines(base_lines.begin(), base_lines.begin() + 13);
  const Environment without = load_model(dir.write("n.yaml", join_lines(lines)), 8, 1.0);
  CHECK(without.logging_policy.size() == 0);
  CHECK(without.model.horizon == 8);

  CHECK_THROWS_AS(load_model(dir.path() / "m.yaml", 0, 1.0), std::invalid_argument);
  CHECK_THROWS_AS(load_model(dir.path() / "m.yaml", 8, 0.0), std::invalid_argument);
}

TEST_CASE("model file errors name the file, the line and the key path", "[model_file]") {
  struct Case {
    std::string text;
    int line;
    std::string key;
    std::string fragment;
  };
  const std::vector<Case> cases{
      {base_with(7, "    - [0.2, 0.9]"), 7, "transitions[0][1]", "entries sum to 1.1, not 1"},
      {base_with(8, "  - - [1.5, -0.5]"), 8, "transitions[1][0][1]", "must be a probability (non-negative), got -0.5"},
      {base_with(9, ""), 8, "transitions[1]", "has 1 row, expected 2 (states)"},
      {base_with(7, "    - [0.2, 0.3, 0.5]"), 7, "transitions[0][1]", "has 3 entries, expected 2 (states)"},
      {base_with(2, "actions: 3"), 6, "transitions", "has 2 matrices, expected 3 (actions)"},
      {base_with(1, "states: 3"), 4, "initial", "has 2 entries, expected 3 (states)"},
      {base_with(1, "states: two"), 1, "states", "expected a whole number, got 'two'"},
      {base_with(3, "observations: 0"), 3, "observations", "must be at least 1, got 0"},
      {base_with(4, "initial: [0.5, 0.6]"), 4, "initial", "entries sum to 1.1"},
      {base_with(12, "  - [0.1, 0.1, 0.7]"), 12, "emissions[1]", "entries sum to 0.9"},
      {base_with(11, "  - [0.7, 0.3]"), 11, "emissions[0]", "has 2 entries, expected 3 (observations)"},
      {base_with(13, "rewards: [0, 1]"), 13, "rewards", "has 2 entries, expected 3 (observations)"},
      {base_with(13, "rewards: [0, .inf, 1]"), 13, "rewards[1]", "expected a number, got '.inf'"},
      {base_with(13, "rewards: [0, x, 1]"), 13, "rewards[1]", "expected a number, got 'x'"},
      {base_with(13, ""), 1, "rewards", "is missing"},
      {base_with(16, "  - [0.1, 0.8, 0.1]"), 16, "logging_policy[1]", "has 3 entries, expected 2 (actions)"},
      {base_with(15, "  - [0.9, 0.2]"), 15, "logging_policy[0]", "entries sum to 1.1"},
      {base_with(10, "emmissions:"), 10, "emmissions", "unknown key 'emmissions'; did you mean 'emissions'?"},
      {base_with(14, "policy:"), 14, "policy", "unknown key 'policy'; expected one of: states, actions"},
      {base_with(14, "horizon: 5"), 14, "horizon", "stays in the study (environment.horizon)"},
      {join_lines(base_lines) + "states: 2\n", 17, "states", "is given twice (first on line 1)"},
      {base_with(4, "initial: 0.5"), 4, "initial", "expected a list, got '0.5'"},
      {base_with(13, "rewards: {a: 1}"), 13, "rewards", "expected a list, got a mapping"},
      {base_with(9, "    - [0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5]"), 9,
       "transitions[1][1]", "has 16 entries, expected 2 (states)"},
      {base_with(11, "  - 0.7"), 11, "emissions[0]", "expected a list, got '0.7'"},
  };
  TempDir dir;
  int i = 0;
  for (const Case& c : cases) {
    const std::string name = "bad" + std::to_string(i++) + ".yaml";
    const fs::path file = dir.write(name, c.text);
    const InputError e = error_of([&] { load_model(file, 8, 1.0); });
    INFO(e.what());
    CHECK(e.file == file.string());
    CHECK(e.line == c.line);
    CHECK(e.key == c.key);
    CHECK_THAT(e.message, Catch::Contains(c.fragment));
    CHECK_THAT(std::string(e.what()),
               Catch::StartsWith(file.string() + ":" + std::to_string(c.line) + ": " + c.key + ": "));
  }
}

TEST_CASE("unreadable, malformed and empty model files", "[model_file]") {
  TempDir dir;
  const InputError missing = error_of([&] { load_model(dir.path() / "nope.yaml", 8, 1.0); });
  CHECK(missing.line == 0);
  CHECK(missing.file == (dir.path() / "nope.yaml").string());
  CHECK_THAT(std::string(missing.what()), Catch::Contains("nope.yaml: cannot read the model file: no such file"));

  const fs::path bad = dir.write("bad.yaml", "states: 2\nactions: 2\ninitial: [0.5, 0.5\nrewards: [1]\n");
  const InputError malformed = error_of([&] { load_model(bad, 8, 1.0); });
  CHECK(malformed.line == 4);
  CHECK(malformed.key.empty());
  CHECK_THAT(malformed.message, Catch::StartsWith("malformed YAML"));

  const InputError empty = error_of([&] { load_model(dir.write("empty.yaml", ""), 8, 1.0); });
  CHECK_THAT(empty.message, Catch::Contains("expected a model"));

  const InputError list = error_of([&] { load_model(dir.write("list.yaml", "- 1\n- 2\n"), 8, 1.0); });
  CHECK(list.line == 1);
  CHECK_THAT(list.message, Catch::Contains("got a list"));
}

// Hardening: a model file is refused (located InputError) before it can make the computation
// overflow or allocate what its declared sizes promise.
TEST_CASE("model files: declared sizes above the limit are refused before any matrix is read", "[model_file]") {
  TempDir dir;
  // Nothing but the sizes: were the sizes not checked first, the message would be about a missing
  // or short `initial`, after sizing its rows by the declared number of states.
  for (const std::string key : {"states", "actions", "observations"}) {
    std::string text = "states: 2\nactions: 2\nobservations: 2\n";
    const auto at = text.find(key + ": 2");
    text.replace(at, key.size() + 3, key + ": 100000");
    const fs::path file = dir.write(key + ".yaml", text);
    const InputError e = error_of([&] { load_model(file, 8, 1.0); });
    INFO(e.what());
    CHECK(e.key == key);
    CHECK_THAT(e.message, Catch::Contains("must be at most 200") && Catch::Contains("got 100000"));
  }
  // The limit itself is accepted as a size (the file is then refused later, for its missing rows).
  const InputError e = error_of([&] { load_model(dir.write("max.yaml", "states: 200\nactions: 1\nobservations: 1\n"), 8, 1.0); });
  CHECK(e.key == "initial");
  CHECK(dobudget::io::max_model_size == 200);
}

TEST_CASE("model files: rewards beyond +-1e100 are refused, a reward of 1e308 included", "[model_file]") {
  TempDir dir;
  for (const std::string reward : {"1e308", "-1e101", "1.7976931348623157e308"}) {
    const fs::path file = dir.write("r.yaml", base_with(13, "rewards: [0, " + reward + ", 1]"));
    const InputError e = error_of([&] { load_model(file, 8, 1.0); });
    INFO(e.what());
    CHECK(e.line == 13);
    CHECK(e.key == "rewards[1]");
    CHECK_THAT(e.message, Catch::Contains("must be at most 1e+100 in absolute value"));
  }
  const Environment env = load_model(dir.write("ok.yaml", base_with(13, "rewards: [0, -1e100, 1e100]")), 8, 1.0);
  CHECK(env.model.rewards(1) == -1e100);
  CHECK(env.model.rewards(2) == 1e100);
}
