// The study file: defaults, validation with located messages, sweep expansion, resolved YAML.
#include <catch2/catch.hpp>

#include "input_error_of.hpp"

#include "temp_dir.hpp"

#include <atomic>
#include <chrono>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <functional>
#include <regex>
#include <sstream>
#include <string>
#include <vector>

#include <fmt/format.h>

#include "io/input_error.hpp"
#include "io/model_file.hpp"
#include "io/study_file.hpp"

namespace fs = std::filesystem;
using namespace dobudget;
using io::InputError;
using io::load_study;
using io::parse_study;
using io::resolved_yaml;

namespace {

using dobudget::test::TempDir;

const std::string model_text =
    "states: 2\n"
    "actions: 2\n"
    "observations: 3\n"
    "initial: [0.5, 0.5]\n"
    "transitions:\n"
    "  - - [0.9, 0.1]\n"
    "    - [0.2, 0.8]\n"
    "  - - [0.5, 0.5]\n"
    "    - [0.5, 0.5]\n"
    "emissions:\n"
    "  - [0.7, 0.2, 0.1]\n"
    "  - [0.1, 0.1, 0.8]\n"
    "rewards: [0, 0.5, 1]\n";

Study parse(const std::string& text) { return parse_study(text, "study.yaml"); }

using dobudget::test::error_of;

InputError parse_error(const std::string& text) {
  return error_of([&] { parse_study(text, "bad.yaml"); });
}

// Checks line, key, a fragment of the message, and the "FILE:LINE: KEY: " form of what().
void check_error(const std::string& text, int line, const std::string& key, const std::string& fragment) {
  INFO("study:\n" << text);
  const InputError e = parse_error(text);
  INFO("error: " << e.what());
  CHECK(e.file == "bad.yaml");
  CHECK(e.line == line);
  CHECK(e.key == key);
  CHECK_THAT(e.message, Catch::Contains(fragment));
  CHECK_THAT(std::string(e.what()), Catch::StartsWith("bad.yaml:" + std::to_string(line) + ": " + key + ": "));
}

template <class A, class B>
void require_same_bits(const A& a, const B& b) {
  REQUIRE(a.rows() == b.rows());
  REQUIRE(a.cols() == b.cols());
  if (a.size() > 0) REQUIRE(std::memcmp(a.data(), b.data(), sizeof(double) * a.size()) == 0);
}

void require_same(const Environment& a, const Environment& b) {
  CHECK(a.model.states == b.model.states);
  CHECK(a.model.actions == b.model.actions);
  CHECK(a.model.observations == b.model.observations);
  CHECK(a.model.horizon == b.model.horizon);
  CHECK(a.model.discount == b.model.discount);
  require_same_bits(a.model.initial, b.model.initial);
  REQUIRE(a.model.transitions.size() == b.model.transitions.size());
  for (std::size_t k = 0; k < a.model.transitions.size(); ++k)
    require_same_bits(a.model.transitions[k], b.model.transitions[k]);
  require_same_bits(a.model.emissions, b.model.emissions);
  require_same_bits(a.model.rewards, b.model.rewards);
  require_same_bits(a.logging_policy, b.logging_policy);
}

void require_same(const ScenarioSettings& a, const ScenarioSettings& b) {
  const EnvironmentSettings &ea = a.environment, &eb = b.environment;
  REQUIRE(ea.given.has_value() == eb.given.has_value());
  if (ea.given) require_same(*ea.given, *eb.given);
  CHECK(ea.family.states == eb.family.states);
  CHECK(ea.family.actions == eb.family.actions);
  CHECK(ea.family.observations == eb.family.observations);
  CHECK(ea.family.dynamics_concentration == eb.family.dynamics_concentration);
  CHECK(ea.family.observation_noise == eb.family.observation_noise);
  CHECK(ea.horizon == eb.horizon);
  CHECK(ea.discount == eb.discount);
  CHECK(ea.draws == eb.draws);
  CHECK(a.logging.privilege == b.logging.privilege);
  CHECK(a.logging.temperature == b.logging.temperature);
  CHECK(a.logging.q_discount == b.logging.q_discount);
  CHECK(a.pilot.policy == b.pilot.policy);
  CHECK(a.pilot.explore == b.pilot.explore);
  CHECK(a.pilot.floor == b.pilot.floor);
  CHECK(a.logged_budgets == b.logged_budgets);
  CHECK(a.pilot_budgets == b.pilot_budgets);
  CHECK(a.replicates == b.replicates);
  CHECK(a.strategies == b.strategies);
  CHECK(a.measures == b.measures);
  CHECK(a.fit.latent_states == b.fit.latent_states);
  CHECK(a.fit.restarts == b.fit.restarts);
  CHECK(a.fit.max_iterations == b.fit.max_iterations);
  CHECK(a.fit.tolerance == b.fit.tolerance);
  CHECK(a.fit.prior == b.fit.prior);
  CHECK(a.evaluation.trajectories == b.evaluation.trajectories);
  CHECK(a.planner.belief_points == b.planner.belief_points);
  CHECK(a.planner.seed == b.planner.seed);
  CHECK(a.planner.exact_histories == b.planner.exact_histories);
  CHECK(a.planner.rollouts == b.planner.rollouts);
  CHECK(a.targets == b.targets);
  CHECK(a.assurance == b.assurance);
}

void require_same(const Study& a, const Study& b) {
  CHECK(a.name == b.name);
  CHECK(a.seed == b.seed);
  REQUIRE(a.scenarios.size() == b.scenarios.size());
  for (std::size_t i = 0; i < a.scenarios.size(); ++i) {
    INFO("scenario " << i);
    CHECK(a.scenarios[i].index == b.scenarios[i].index);
    CHECK(a.scenarios[i].label == b.scenarios[i].label);
    CHECK(a.scenarios[i].assignments == b.scenarios[i].assignments);
    require_same(a.scenarios[i].settings, b.scenarios[i].settings);
  }
}

// resolved_yaml is deterministic, reloads to the same study, and is a fixed point.
void check_round_trip(const Study& study) {
  const std::string text = resolved_yaml(study);
  INFO("resolved:\n" << text);
  CHECK(resolved_yaml(study) == text);
  TempDir elsewhere;  // the resolved text is self-contained: it loads from any directory
  const Study back = load_study(elsewhere.write("study.resolved.yaml", text));
  require_same(back, study);
  CHECK(resolved_yaml(back) == text);
}

const std::string full_study =
    "name: trial\n"
    "seed: 18446744073709551615\n"
    "environment:\n"
    "  states: 6\n"
    "  actions: 3\n"
    "  observations: 2\n"
    "  horizon: 12\n"
    "  discount: 0.95\n"
    "  draws: 2\n"
    "  dynamics_concentration: 0.1\n"
    "  observation_noise: 0.05\n"
    "logging: { privilege: 1, temperature: 0.05, q_discount: 0.5 }\n"
    "pilot: { policy: uniform }\n"
    "budgets:\n"
    "  logged: [0, 100, 1e4]\n"
    "  pilot: [5, 50]\n"
    "replicates: 3\n"
    "strategies: [regime-aware, pilot-only]\n"
    "measures: [return_gap, model_kl]\n"
    "fit: { latent_states: 5, restarts: 2, max_iterations: 50, tolerance: 1.0e-8, prior: 0 }\n"
    "evaluation: { trajectories: 200, policy: uniform }\n"
    "planner: { belief_points: 100, seed: 7, exact_histories: 0, rollouts: 300 }\n"
    "targets: { model_kl: 0.01, return_gap: 0.1 }\n"
    "assurance: 0.9\n";

}  // namespace

// Hardening: an empty file is far more likely truncated than a request for every default.
TEST_CASE("a file with no study in it is refused, not run as the example study", "[study_file][hardening]") {
  for (const std::string text : {"", "# nothing but a comment\n", "---\n", "---\n# comment\n...\n", "\n\n"}) {
    INFO("text: " << text);
    const InputError e = parse_error(text);
    CHECK(e.file == "bad.yaml");
    CHECK(e.message.find("holds no study") != std::string::npos);
  }
}

// Hardening: names are shown on pages and in figure titles and give the default run directory.
TEST_CASE("a study name with control characters, bad UTF-8 or excessive length is refused", "[study_file][hardening]") {
  check_error("name: \"two\\nlines\"\n", 1, "name", "control characters");
  check_error("name: \"tab\\there\"\n", 1, "name", "control characters");
  check_error("name: \"esc\\e[31m\"\n", 1, "name", "control characters");
  check_error("name: \"" + std::string(201, 'x') + "\"\n", 1, "name", "at most 200 bytes");
  // Invalid UTF-8 (RFC 3629, sec. 3): a lone continuation byte, an overlong form, a surrogate.
  for (const std::string bad : {"a\x80z", "\xc0\xafz", "\xed\xa0\x80"}) check_error("name: " + bad + "\n", 1, "name", "UTF-8");
  // U+202E RIGHT-TO-LEFT OVERRIDE (Boucher and Anderson, "Trojan Source", 2021), U+2028, U+0085.
  for (const std::string bad : {"a\xe2\x80\xaez", "a\xe2\x80\xa8z", "a\xc2\x85z"})
    check_error("name: \"" + bad + "\"\n", 1, "name", "control characters");
  // Allowed: punctuation, spaces, paths-looking text (a name never becomes a path) and UTF-8.
  for (const std::string& ok : std::vector<std::string>{"Orchard irrigation (2026)", "../../escaped", "/etc/passwd", "x`touch PWNED`y",
                               "Gew\xc3\xa4" "chshaus \xe2\x80\x94 pilot", std::string(200, 'y')}) {
    INFO(ok);
    CHECK(parse("name: \"" + ok + "\"\n").name == ok);
  }
}

TEST_CASE("a study of empty sections is the example study, every default filled in", "[study_file]") {
  for (const std::string text : {"name: example\n", "logging:\nfit:\n"}) {
    const Study s = parse(text);
    CHECK(s.name == "example");
    CHECK(s.seed == 1);
    REQUIRE(s.scenarios.size() == 1);
    const Scenario& sc = s.scenarios[0];
    CHECK(sc.index == 0);
    CHECK(sc.label.empty());
    CHECK(sc.assignments.empty());
    const ScenarioSettings& x = sc.settings;
    CHECK_FALSE(x.environment.given.has_value());
    CHECK(x.environment.family.states == 4);
    CHECK(x.environment.family.actions == 2);
    CHECK(x.environment.family.observations == 3);
    CHECK(x.environment.family.dynamics_concentration == 0.5);
    CHECK(x.environment.family.observation_noise == 0.3);
    CHECK(x.environment.horizon == 8);
    CHECK(x.environment.discount == 1.0);
    CHECK(x.environment.draws == 4);
    CHECK(x.logging.privilege == 0.9);
    CHECK(x.logging.temperature == 0.2);
    CHECK(x.logging.q_discount == 0.9);
    CHECK(x.logged_budgets == std::vector<int>{0, 1000});
    CHECK(x.pilot_budgets == std::vector<int>{10, 30, 100, 300, 1000});
    CHECK(x.replicates == 10);
    CHECK(x.strategies == std::vector<Strategy>{Strategy::pilot_only, Strategy::pooled, Strategy::regime_aware});
    CHECK(x.measures == std::vector<Measure>{Measure::model_kl});
    CHECK(x.fit.latent_states == 4);
    CHECK(x.fit.restarts == 3);
    CHECK(x.fit.max_iterations == 200);
    CHECK(x.fit.tolerance == 1e-6);
    CHECK(x.fit.prior == 0.1);
    CHECK(x.evaluation.trajectories == 1000);
    CHECK(x.planner.belief_points == 500);
    CHECK(x.planner.seed == 0);
    CHECK(x.planner.exact_histories == 20000);
    CHECK(x.planner.rollouts == 2000);
    CHECK(x.targets == std::map<Measure, double>{{Measure::model_kl, 0.02}});
    CHECK(x.assurance == 0.8);
  }
}

TEST_CASE("every key is read as written", "[study_file]") {
  const Study s = parse(full_study);
  CHECK(s.name == "trial");
  CHECK(s.seed == 18446744073709551615ull);
  REQUIRE(s.scenarios.size() == 1);
  const ScenarioSettings& x = s.scenarios[0].settings;
  CHECK(x.environment.family.states == 6);
  CHECK(x.environment.family.actions == 3);
  CHECK(x.environment.family.observations == 2);
  CHECK(x.environment.horizon == 12);
  CHECK(x.environment.discount == 0.95);
  CHECK(x.environment.draws == 2);
  CHECK(x.environment.family.dynamics_concentration == 0.1);
  CHECK(x.environment.family.observation_noise == 0.05);
  CHECK(x.logging.privilege == 1.0);
  CHECK(x.logging.temperature == 0.05);
  CHECK(x.logging.q_discount == 0.5);
  CHECK(x.logged_budgets == std::vector<int>{0, 100, 10000});
  CHECK(x.pilot_budgets == std::vector<int>{5, 50});
  CHECK(x.replicates == 3);
  CHECK(x.strategies == std::vector<Strategy>{Strategy::regime_aware, Strategy::pilot_only});
  CHECK(x.measures == std::vector<Measure>{Measure::return_gap, Measure::model_kl});
  CHECK(x.fit.latent_states == 5);
  CHECK(x.fit.restarts == 2);
  CHECK(x.fit.max_iterations == 50);
  CHECK(x.fit.tolerance == 1e-8);
  CHECK(x.fit.prior == 0.0);
  CHECK(x.evaluation.trajectories == 200);
  CHECK(x.planner.belief_points == 100);
  CHECK(x.planner.seed == 7);
  CHECK(x.planner.exact_histories == 0);
  CHECK(x.planner.rollouts == 300);
  CHECK(x.targets == std::map<Measure, double>{{Measure::model_kl, 0.01}, {Measure::return_gap, 0.1}});
  CHECK(x.assurance == 0.9);
}

TEST_CASE("derived defaults: latent states follow the environment, targets follow the measures", "[study_file]") {
  CHECK(parse("environment: { states: 7 }").scenarios[0].settings.fit.latent_states == 7);
  CHECK(parse("environment: { states: 7 }\nfit: { latent_states: 3 }").scenarios[0].settings.fit.latent_states == 3);
  CHECK(parse("measures: [return_gap]").scenarios[0].settings.targets.empty());
  CHECK(parse("measures: [return_gap, model_kl]").scenarios[0].settings.targets ==
        std::map<Measure, double>{{Measure::model_kl, 0.02}});
  CHECK(parse("targets: {}").scenarios[0].settings.targets.empty());
}

TEST_CASE("InputError formats FILE:LINE: KEY: MESSAGE", "[study_file]") {
  CHECK(std::string(InputError("s.yaml", 3, "budgets.pilot[2]", "bad").what()) == "s.yaml:3: budgets.pilot[2]: bad");
  CHECK(std::string(InputError("s.yaml", 0, "", "cannot read").what()) == "s.yaml: cannot read");
  CHECK(std::string(InputError("s.yaml", 4, "", "malformed").what()) == "s.yaml:4: malformed");
}

TEST_CASE("malformed YAML reports yaml-cpp's line", "[study_file]") {
  const InputError e = parse_error("name: x\nbudgets:\n  pilot: [1, 2\nreplicates: 3\n");
  CHECK(e.file == "bad.yaml");
  CHECK(e.line == 4);
  CHECK(e.key.empty());
  CHECK_THAT(e.message, Catch::StartsWith("malformed YAML: "));
  const InputError tabs = parse_error("name: x\nlogging:\n  privilege: 0.5\n   temperature: 0.1\n");
  CHECK(tabs.line == 4);
  CHECK_THAT(std::string(parse_error("- a\n- b\n").what()), Catch::Contains("expected a study"));
  const InputError two = parse_error("name: a\n---\nname: b\n");
  CHECK(two.line == 3);
  CHECK_THAT(two.message, Catch::Contains("holds 2 YAML documents"));
  // Windows line endings read the same, with the same lines.
  CHECK(parse("name: crlf\r\nreplicates: 2\r\n").scenarios[0].settings.replicates == 2);
  check_error("name: crlf\r\n\r\nreplicats: 2\r\n", 3, "replicats", "did you mean 'replicates'?");
}

TEST_CASE("unknown and repeated keys, with the closest valid key suggested", "[study_file]") {
  check_error("name: x\nreplicats: 3\n", 2, "replicats", "unknown key 'replicats'; did you mean 'replicates'?");
  check_error("logging:\n  privilege: 0.5\n  temprature: 0.1\n", 3, "logging.temprature",
              "did you mean 'temperature'?");
  check_error("environment:\n  observation_nois: 0.1\n", 2, "environment.observation_nois",
              "did you mean 'observation_noise'?");
  check_error("fit: { latentstates: 3 }\n", 1, "fit.latentstates", "did you mean 'latent_states'?");
  check_error("planner:\n  rolouts: 5\n", 2, "planner.rolouts", "did you mean 'rollouts'?");
  check_error("budgets:\n  pilots: [1]\n", 2, "budgets.pilots", "did you mean 'pilot'?");
  check_error("evaluation:\n  trajectory: 5\n", 2, "evaluation.trajectory", "did you mean 'trajectories'?");
  check_error("colour: blue\n", 1, "colour", "unknown key 'colour'; expected one of: name, seed, environment");
  check_error("seed: 1\nseed: 2\n", 2, "seed", "is given twice (first on line 1)");
  check_error("logging: 0.5\n", 1, "logging", "expected a mapping of 'key: value' entries, got '0.5'");
  check_error("targets:\n  model_k: 0.1\n", 2, "targets.model_k", "did you mean 'model_kl'?");
}

TEST_CASE("wrong types", "[study_file]") {
  check_error("environment:\n  states: four\n", 2, "environment.states", "expected a whole number, got 'four'");
  check_error("environment:\n  horizon: 2.5\n", 2, "environment.horizon", "expected a whole number, got '2.5'");
  check_error("replicates: [1, 2]\n", 1, "replicates", "expected a whole number, got a list");
  check_error("replicates:\n", 1, "replicates", "expected a whole number, got nothing");
  check_error("logging:\n  privilege: high\n", 2, "logging.privilege", "expected a number, got 'high'");
  check_error("logging:\n  temperature: .inf\n", 2, "logging.temperature", "expected a number");
  check_error("seed: -1\n", 1, "seed", "expected a whole number from 0 to 18446744073709551615");
  check_error("name: [a]\n", 1, "name", "expected a single value, got a list");
  check_error("name: ''\n", 1, "name", "must not be empty");
  check_error("strategies: pooled\n", 1, "strategies", "expected a list, got 'pooled'");
  check_error("measures:\n  - model_kl\n  - [return_gap]\n", 3, "measures[1]", "expected a single value, got a list");
  check_error("environment:\n  states: 1e12\n", 2, "environment.states", "must be at most 2147483647");
}

TEST_CASE("sizes must be at least 1", "[study_file]") {
  const std::vector<std::pair<std::string, std::string>> sizes{
      {"environment", "states"},        {"environment", "actions"}, {"environment", "observations"},
      {"environment", "horizon"},       {"environment", "draws"},   {"fit", "latent_states"},
      {"fit", "restarts"},              {"fit", "max_iterations"},  {"evaluation", "trajectories"},
      {"planner", "belief_points"}};
  for (const auto& [section, key] : sizes)
    check_error("name: x\n" + section + ":\n  " + key + ": 0\n", 3, section + "." + key, "must be at least 1, got 0");
  // Rollouts give a standard error: at least 2 (1 was accepted and failed as an internal error).
  check_error("name: x\nplanner:\n  rollouts: 0\n", 3, "planner.rollouts", "must be at least 2, got 0");
  check_error("replicates: 0\n", 1, "replicates", "must be at least 1, got 0");
  check_error("planner:\n  exact_histories: -1\n", 2, "planner.exact_histories", "must be at least 0, got -1");
}

TEST_CASE("budgets: non-empty, strictly increasing whole numbers", "[study_file]") {
  check_error("budgets:\n  pilot: [10, 30, 20]\n", 2, "budgets.pilot[2]",
              "must be larger than the previous budget (30)");
  check_error("budgets:\n  pilot: [10, 10]\n", 2, "budgets.pilot[1]", "must be larger than the previous budget (10)");
  check_error("budgets:\n  pilot:\n    - 10\n    - 0.5\n", 4, "budgets.pilot[1]", "expected a whole number, got '0.5'");
  check_error("budgets:\n  pilot: [-1, 10]\n", 2, "budgets.pilot[0]", "must be at least 0, got -1");
  // A pilot budget of 0 needs logged episodes (issue 10, item 4): the default logged budgets
  // {0, 1000} have them, logged [0] has none.
  CHECK(parse("budgets:\n  pilot: [0, 10]\n").scenarios[0].settings.pilot_budgets == std::vector<int>{0, 10});
  check_error("budgets:\n  logged: [0]\n  pilot: [0, 10]\n", 3, "budgets.pilot[0]",
              "is 0 pilot episodes, which needs logged episodes (budgets.logged has none above 0)");
  check_error("budgets:\n  logged: [-1, 10]\n", 2, "budgets.logged[0]", "must be at least 0, got -1");
  check_error("budgets:\n  logged: []\n", 2, "budgets.logged", "must list at least one budget");
  check_error("budgets:\n  pilot: 100\n", 2, "budgets.pilot", "expected a list, got '100'");
  CHECK(parse("budgets: { logged: [0], pilot: [1] }").scenarios[0].settings.pilot_budgets == std::vector<int>{1});
}

TEST_CASE("probabilities and ranges", "[study_file]") {
  struct Case {
    std::string section, key, value, requirement;
  };
  const std::vector<Case> cases{
      {"logging", "privilege", "1.5", "must be in [0, 1], got 1.5"},
      {"logging", "privilege", "-0.1", "must be in [0, 1], got -0.1"},
      {"logging", "temperature", "0", "must be greater than 0, got 0"},
      {"logging", "q_discount", "1", "must be in [0, 1), got 1"},
      {"logging", "q_discount", "-0.5", "must be in [0, 1), got -0.5"},
      {"environment", "observation_noise", "1.01", "must be in [0, 1], got 1.01"},
      {"environment", "dynamics_concentration", "0", "must be greater than 0, got 0"},
      {"environment", "discount", "0", "must be in (0, 1], got 0"},
      {"environment", "discount", "1.5", "must be in (0, 1], got 1.5"},
      {"fit", "prior", "-1", "must be in [0, 1e100], got -1"},
      {"fit", "tolerance", "0", "must be greater than 0, got 0"},
      {"targets", "model_kl", "0", "must be greater than 0, got 0"},
      {"targets", "model_kl", "-0.01", "must be greater than 0, got -0.01"},
  };
  for (const Case& c : cases)
    check_error("seed: 3\n" + c.section + ":\n  " + c.key + ": " + c.value + "\n", 3, c.section + "." + c.key,
                c.requirement);
  check_error("assurance: 1\n", 1, "assurance", "must be in (0, 1), got 1");
  check_error("assurance: 0\n", 1, "assurance", "must be in (0, 1), got 0");
  // The edges that are allowed.
  const Study edges = parse(
      "logging: { privilege: 0, q_discount: 0 }\nenvironment: { observation_noise: 1, discount: 1 }\nfit: { prior: 0 "
      "}\n");
  CHECK(edges.scenarios[0].settings.logging.privilege == 0.0);
  CHECK(edges.scenarios[0].settings.environment.family.observation_noise == 1.0);
}

TEST_CASE("strategies, measures, policies and targets", "[study_file]") {
  check_error("strategies: [pilot-only, poold]\n", 1, "strategies[1]",
              "unknown strategy 'poold'; did you mean 'pooled'?");
  check_error("strategies:\n  - regime_aware\n", 2, "strategies[0]", "did you mean 'regime-aware'?");
  check_error("strategies: [magic]\n", 1, "strategies[0]", "expected one of: pilot-only, pooled, regime-aware");
  check_error("strategies:\n  - pooled\n  - pilot-only\n  - pooled\n", 4, "strategies[2]",
              "'pooled' is listed twice (first as strategies[0])");
  check_error("strategies: []\n", 1, "strategies", "must list at least one strategy");
  check_error("measures: [model_k]\n", 1, "measures[0]", "unknown measure 'model_k'; did you mean 'model_kl'?");
  check_error("measures: [return_gap, return_gap]\n", 1, "measures[1]", "listed twice");
  check_error("measures: [model_kl]\ntargets:\n  return_gap: 0.1\n", 3, "targets.return_gap",
              "is a target for return_gap, which is not measured");
  check_error("measures: [return_gap]\ntargets: { model_kl: 0.1 }\n", 2, "targets.model_kl", "not measured");
  check_error("pilot:\n  policy: expert\n", 2, "pilot.policy",
              "unknown pilot policy 'expert'; expected one of: uniform, usual-practice, complement, targeted");
  check_error("pilot:\n  policy: [uniform, complment]\n", 2, "pilot.policy[1]", "did you mean 'complement'?");
  check_error("pilot:\n  policy: [uniform, targeted, uniform]\n", 2, "pilot.policy[2]",
              "'uniform' is listed twice (first as pilot.policy[0])");
  check_error("pilot:\n  policy: []\n", 2, "pilot.policy", "must list at least one pilot policy");
  check_error("pilot:\n  policy: [uniform, targeted]\nsweep:\n  pilot.policy: [uniform]\n", 2, "pilot.policy",
              "is a list and sweep.pilot.policy is given too");
  check_error("pilot:\n  explore: 1.5\n", 2, "pilot.explore", "must be in [0, 1], got 1.5");
  check_error("sweep:\n  pilot.floor: [0.1, -1]\n", 2, "sweep.pilot.floor[1]", "must be in [0, 1]");
  check_error("evaluation:\n  policy: greedy\n", 2, "evaluation.policy", "only 'uniform' is supported for now");
}

TEST_CASE("a model file is resolved relative to the study file", "[study_file]") {
  TempDir dir;
  dir.write("sub/models/m.yaml", model_text);
  const fs::path study_file =
      dir.write("sub/study.yaml", "environment:\n  file: models/m.yaml\n  horizon: 5\n  discount: 0.9\n");
  const Study s = load_study(study_file);
  const EnvironmentSettings& e = s.scenarios[0].settings.environment;
  REQUIRE(e.given.has_value());
  CHECK(e.draws == 1);
  CHECK(e.horizon == 5);
  CHECK(e.discount == 0.9);
  CHECK(e.given->model.states == 2);
  CHECK(e.given->model.horizon == 5);
  CHECK(e.given->model.discount == 0.9);
  CHECK(e.given->model.transitions[0](1, 0) == 0.2);
  CHECK(e.given->logging_policy.size() == 0);  // built later from the logging settings
  CHECK(s.scenarios[0].settings.fit.latent_states == 2);  // the model's number of states

  // An absolute path works too, and draws: 1 may be written.
  const fs::path absolute = dir.write(
      "elsewhere/study.yaml", "environment: { file: '" + (dir.path() / "sub/models/m.yaml").string() + "', draws: 1 }\n");
  CHECK(load_study(absolute).scenarios[0].settings.environment.given->model.states == 2);

  // A missing model file is reported at the study's line.
  const fs::path missing = dir.write("sub/missing.yaml", "name: x\nenvironment:\n  file: models/none.yaml\n");
  const InputError e1 = error_of([&] { load_study(missing); });
  CHECK(e1.file == missing.string());
  CHECK(e1.line == 3);
  CHECK(e1.key == "environment.file");
  CHECK_THAT(e1.message, Catch::Contains("no such file"));
  CHECK_THAT(e1.message, Catch::Contains((dir.path() / "sub/models/none.yaml").string()));

  // A mistake inside the model file is reported in the model file.
  dir.write("sub/models/bad.yaml", model_text + "emmissions: 1\n");
  const InputError e2 = error_of([&] { load_study(dir.write("sub/s2.yaml", "environment: { file: models/bad.yaml }\n")); });
  CHECK(e2.file == (dir.path() / "sub/models/bad.yaml").string());
  CHECK(e2.line == 14);
  CHECK(e2.key == "emmissions");
}

TEST_CASE("a model file excludes the synthetic family", "[study_file]") {
  TempDir dir;
  dir.write("m.yaml", model_text);
  const auto error_in = [&](const std::string& text) {
    const fs::path f = dir.write("s.yaml", text);
    return error_of([&] { load_study(f); });
  };
  const InputError states = error_in("environment:\n  file: m.yaml\n  states: 4\n");
  CHECK(states.line == 3);
  CHECK(states.key == "environment.states");
  CHECK_THAT(states.message, Catch::Contains("cannot be combined with environment.file"));
  const InputError noise = error_in("environment:\n  observation_noise: 0.1\n  file: m.yaml\n");
  CHECK(noise.key == "environment.observation_noise");
  const InputError draws = error_in("environment:\n  file: m.yaml\n  draws: 4\n");
  CHECK(draws.line == 3);
  CHECK(draws.key == "environment.draws");
  CHECK_THAT(draws.message, Catch::Contains("must be 1"));
  const InputError both = error_in("environment:\n  file: m.yaml\n  model: { states: 1 }\n");
  CHECK(both.key == "environment.model");
  const InputError swept = error_in("environment: { file: m.yaml }\nsweep:\n  environment.states: [2, 3]\n");
  CHECK(swept.line == 3);
  CHECK(swept.key == "sweep.environment.states[0]");
}

TEST_CASE("load_study of a missing file", "[study_file]") {
  TempDir dir;
  const InputError e = error_of([&] { load_study(dir.path() / "absent.yaml"); });
  CHECK(e.line == 0);
  CHECK(e.file == (dir.path() / "absent.yaml").string());
  CHECK_THAT(std::string(e.what()), Catch::EndsWith("absent.yaml: cannot read the study file: no such file"));
}

TEST_CASE("sweep: cartesian product in written order, last key fastest", "[study_file]") {
  const Study s = parse(
      "logging: { privilege: 0.9, temperature: 0.3 }\n"
      "sweep:\n"
      "  logging.privilege: [0.0, 0.50]\n"
      "  environment.observation_noise: [0.1, 0.2, 0.3]\n"
      "  replicates: [5]\n");
  REQUIRE(s.scenarios.size() == 6);
  const double privilege[] = {0, 0, 0, 0.5, 0.5, 0.5};
  const double noise[] = {0.1, 0.2, 0.3, 0.1, 0.2, 0.3};
  for (int i = 0; i < 6; ++i) {
    const Scenario& sc = s.scenarios[i];
    CHECK(sc.index == i);
    CHECK(sc.settings.logging.privilege == privilege[i]);
    CHECK(sc.settings.environment.family.observation_noise == noise[i]);
    CHECK(sc.settings.logging.temperature == 0.3);  // not swept: as written
    CHECK(sc.settings.replicates == 5);
  }
  CHECK(s.scenarios[0].label == "logging.privilege=0, environment.observation_noise=0.1, replicates=5");
  CHECK(s.scenarios[4].label == "logging.privilege=0.5, environment.observation_noise=0.2, replicates=5");
  CHECK(s.scenarios[4].assignments ==
        std::vector<std::pair<std::string, std::string>>{
            {"logging.privilege", "0.5"}, {"environment.observation_noise", "0.2"}, {"replicates", "5"}});

  // Derived defaults follow swept values; swept targets and seeds.
  const Study t = parse(
      "measures: [model_kl, return_gap]\n"
      "sweep:\n"
      "  environment.states: [3, 5]\n"
      "  targets.return_gap: [0.1]\n"
      "  planner.seed: [18446744073709551615]\n");
  REQUIRE(t.scenarios.size() == 2);
  CHECK(t.scenarios[0].settings.fit.latent_states == 3);
  CHECK(t.scenarios[1].settings.fit.latent_states == 5);
  CHECK(t.scenarios[1].settings.targets == std::map<Measure, double>{{Measure::return_gap, 0.1}});
  CHECK(t.scenarios[1].settings.planner.seed == 18446744073709551615ull);
  CHECK(t.scenarios[1].label == "environment.states=5, targets.return_gap=0.1, planner.seed=18446744073709551615");
}

TEST_CASE("sweep errors name the sweep entry", "[study_file]") {
  check_error("sweep:\n  logging.privilege: [0, 0.5, 1.5]\n", 2, "sweep.logging.privilege[2]",
              "must be in [0, 1], got 1.5");
  check_error("sweep:\n  logging.privilege:\n    - 0\n    - 1.5\n", 4, "sweep.logging.privilege[1]", "must be in [0, 1]");
  check_error("sweep:\n  replicates: [10, 0]\n", 2, "sweep.replicates[1]", "must be at least 1, got 0");
  check_error("sweep:\n  environment.states: [4, four]\n", 2, "sweep.environment.states[1]",
              "expected a whole number, got 'four'");
  check_error("sweep:\n  pilot.policy: [uniform, expert]\n", 2, "sweep.pilot.policy[1]",
              "unknown pilot policy 'expert'");
  check_error("measures: [model_kl]\nsweep:\n  targets.return_gap: [0.1]\n", 3, "sweep.targets.return_gap[0]",
              "not measured");
  check_error("sweep:\n  logging.privilge: [0.5]\n", 2, "sweep.logging.privilge",
              "unknown key 'logging.privilge'; did you mean 'logging.privilege'?");
  check_error("sweep:\n  budgets.pilot: [[10, 20]]\n", 2, "sweep.budgets.pilot", "is a list");
  check_error("sweep:\n  strategies: [pooled]\n", 2, "sweep.strategies", "is a list");
  check_error("sweep:\n  logging: [0.5]\n", 2, "sweep.logging", "is a section");
  check_error("sweep:\n  seed: [1, 2]\n", 2, "sweep.seed", "cannot be swept");
  check_error("sweep:\n  environment.file: [a.yaml]\n", 2, "sweep.environment.file", "cannot be swept");
  check_error("sweep:\n  logging.privilege: []\n", 2, "sweep.logging.privilege", "must list at least one value");
  check_error("sweep:\n  logging.privilege: 0.5\n", 2, "sweep.logging.privilege",
              "expected a non-empty list of values");
  check_error("sweep:\n  logging.privilege: [0.5, 0.50]\n", 2, "sweep.logging.privilege[1]",
              "value 0.5 is listed twice (first as sweep.logging.privilege[0])");
  check_error("sweep: [logging.privilege]\n", 1, "sweep", "expected a mapping");
}

TEST_CASE("pilot policies: a list is a sweep axis over pilot.policy, after the sweep's keys", "[study_file][pilot-policy]") {
  const Study s = parse(
      "pilot: { policy: [uniform, targeted, usual-practice], explore: 0.3, floor: 0.1 }\n"
      "sweep:\n  logging.privilege: [0.5, 0.9]\n");
  REQUIRE(s.scenarios.size() == 6);
  const PilotPolicyKind order[] = {PilotPolicyKind::uniform, PilotPolicyKind::targeted, PilotPolicyKind::usual_practice};
  for (int i = 0; i < 6; ++i) {
    const Scenario& sc = s.scenarios[static_cast<std::size_t>(i)];
    CHECK(sc.settings.pilot.policy == order[i % 3]);
    CHECK(sc.settings.pilot.explore == 0.3);
    CHECK(sc.settings.pilot.floor == 0.1);
    CHECK(sc.settings.logging.privilege == (i < 3 ? 0.5 : 0.9));
  }
  CHECK(s.scenarios[4].label == "logging.privilege=0.9, pilot.policy=targeted");
  check_round_trip(s);
  CHECK_THAT(resolved_yaml(s), Catch::Contains("pilot.policy: [uniform, targeted, usual-practice]"));
  // One policy is one scenario, as before.
  const Study one = parse("pilot: { policy: complement }\n");
  REQUIRE(one.scenarios.size() == 1);
  CHECK(one.scenarios[0].settings.pilot.policy == PilotPolicyKind::complement);
  CHECK(one.scenarios[0].label.empty());
  check_round_trip(one);
}

TEST_CASE("resolved_yaml round-trips the study", "[study_file]") {
  SECTION("defaults") { check_round_trip(parse("name: example\n")); }
  SECTION("every key given") { check_round_trip(parse(full_study)); }
  SECTION("odd values") {
    check_round_trip(parse(
        "name: 'null'\nseed: 0\nlogging: { privilege: 0.1234567890123456789, temperature: 3e-300 }\n"
        "fit: { tolerance: 1.0e-6, prior: 0 }\nmeasures: [return_gap]\n"));
  }
  SECTION("a sweep, with latent states following swept states") {
    const Study s = parse(
        "measures: [model_kl, return_gap]\n"
        "logging: { privilege: 0.7 }\n"
        "sweep:\n"
        "  environment.states: [3, 5]\n"
        "  logging.privilege: [0.0, 0.5]\n"
        "  targets.model_kl: [0.01, 0.1]\n"
        "  planner.seed: [18446744073709551615]\n");
    REQUIRE(s.scenarios.size() == 8);
    check_round_trip(s);
    const std::string text = resolved_yaml(s);
    CHECK_THAT(text, Catch::Contains("sweep:\n  environment.states: [3, 5]\n  logging.privilege: [0, 0.5]\n"));
    CHECK_THAT(text, !Catch::Contains("  latent_states:"));
  }
  SECTION("a sweep with latent states given") {
    check_round_trip(parse("fit: { latent_states: 2 }\nsweep:\n  environment.states: [3, 5]\n"));
    check_round_trip(parse("sweep:\n  fit.latent_states: [1, 2]\n  environment.states: [3, 5]\n"));
  }
  SECTION("a model file is written inline") {
    TempDir dir;
    dir.write("m.yaml", model_text);
    const Study s = load_study(dir.write("s.yaml",
                                         "environment: { file: m.yaml, horizon: 4 }\n"
                                         "sweep:\n  environment.discount: [0.5, 1]\n"));
    const std::string text = resolved_yaml(s);
    CHECK_THAT(text, Catch::Contains("model:"));
    CHECK_THAT(text, !Catch::Contains("m.yaml"));
    check_round_trip(s);
  }
  SECTION("a model with a logging policy, given inline") {
    const Study s = parse("environment:\n  model:\n" + [] {
      std::string indented;
      for (char c : model_text + "logging_policy: [[0.9, 0.1], [0.1, 0.9]]\n") {
        if (indented.empty() || indented.back() == '\n') indented += "    ";
        indented += c;
      }
      return indented;
    }());
    REQUIRE(s.scenarios[0].settings.environment.given.has_value());
    CHECK(s.scenarios[0].settings.environment.given->logging_policy(0, 0) == 0.9);
    check_round_trip(s);
  }
}

TEST_CASE("inline model errors are located in the study", "[study_file]") {
  check_error("environment:\n  model:\n    states: 2\n    actions: 1\n    observations: 1\n    initial: [0.5, 0.4]\n",
              6, "environment.model.initial", "entries sum to 0.9");
  check_error("environment:\n  model: 3\n", 2, "environment.model", "expected a model");
}

// Hardening: values the computation cannot hold are refused while the study is read, with the
// key named (InputError), before any scenario is built.
TEST_CASE("study limits: every bounded key refuses the first value above its limit", "[study_file][limits]") {
  struct Case {
    std::string text;
    std::string key;
    std::string fragment;
  };
  const std::vector<Case> cases{
      {"environment: { states: 201 }", "environment.states", "must be at most 200"},
      {"environment: { states: 100000 }", "environment.states", "must be at most 200"},
      {"environment: { actions: 201 }", "environment.actions", "must be at most 200"},
      {"environment: { observations: 100000000 }", "environment.observations", "must be at most 200"},
      {"environment: { observations: 1e8 }", "environment.observations", "must be at most 200"},
      {"environment: { horizon: 10001 }", "environment.horizon", "must be at most 10000"},
      {"environment: { horizon: 2147483647 }", "environment.horizon", "must be at most 10000"},
      {"environment: { draws: 100001 }", "environment.draws", "must be at most 100000"},
      {"replicates: 100001", "replicates", "must be at most 100000"},
      {"budgets: { pilot: [5, 2147483647] }", "budgets.pilot[1]", "must be at most 10000000 episodes"},
      {"budgets: { logged: [0, 10000001] }", "budgets.logged[1]", "must be at most 10000000 episodes"},
      {"fit: { latent_states: 201 }", "fit.latent_states", "must be at most 200"},
      {"fit: { restarts: 1001 }", "fit.restarts", "must be at most 1000"},
      {"fit: { max_iterations: 100001 }", "fit.max_iterations", "must be at most 100000"},
      {"fit: { prior: 1e101 }", "fit.prior", "must be in [0, 1e100]"},
      {"evaluation: { trajectories: 10000001 }", "evaluation.trajectories", "must be at most 10000000"},
      {"planner: { belief_points: 10001 }", "planner.belief_points", "must be at most 10000"},
      {"planner: { exact_histories: 1000000001 }", "planner.exact_histories", "must be at most 1000000000"},
      {"planner: { rollouts: 10000001 }", "planner.rollouts", "must be at most 10000000"},
      {"planner: { rollouts: 1 }", "planner.rollouts", "must be at least 2"},  // a standard error needs 2
      {"sweep: { environment.horizon: [8, 20000] }", "sweep.environment.horizon[1]", "must be at most 10000"},
  };
  for (const Case& c : cases) {
    const std::string text = "name: limits\n" + c.text + "\n";
    check_error(text, 2, c.key, c.fragment);
  }
  // Each limit itself is accepted.
  const Study ok = parse("name: limits\nenvironment: { states: 200, actions: 200, observations: 200, horizon: 10000,"
                         " draws: 100 }\nbudgets: { pilot: [1, 10000000], logged: [0, 10000000] }\nreplicates: 100000\n"
                         "fit: { restarts: 1000, max_iterations: 100000, prior: 1e100 }\n"
                         "evaluation: { trajectories: 10000000 }\n"
                         "planner: { belief_points: 10000, exact_histories: 1000000000, rollouts: 10000000 }\n");
  CHECK(ok.scenarios.front().settings.environment.horizon == 10000);
  CHECK(ok.scenarios.front().settings.pilot_budgets.back() == 10000000);
}

TEST_CASE("study limits: a sweep whose scenario count overflows is refused before any scenario is built",
          "[study_file][limits]") {
  // 16 keys of 16 values: 16^16 = 2^64 scenarios, which a 64-bit count wraps to 0 (before, the
  // study was "valid" with no scenario). The product is checked as it grows, without overflow.
  const std::vector<std::string> keys{"logging.privilege",      "logging.temperature", "logging.q_discount",
                                      "fit.tolerance",          "fit.prior",           "assurance",
                                      "environment.discount",   "environment.observation_noise",
                                      "environment.dynamics_concentration",             "fit.restarts",
                                      "fit.max_iterations",     "replicates",          "evaluation.trajectories",
                                      "planner.belief_points",  "planner.rollouts",    "planner.seed"};
  std::string text = "name: wide\nsweep:\n";
  for (const std::string& k : keys) {
    text += "  " + k + ": [";
    for (int v = 1; v <= 16; ++v) {
      // values valid for every key: 0.01 .. 0.16 for the real-valued ones, 2 .. 17 for whole ones
      const bool whole = k.rfind("fit.restarts", 0) == 0 || k == "fit.max_iterations" || k == "replicates" ||
                         k.rfind("evaluation", 0) == 0 || k.rfind("planner", 0) == 0;
      text += (v > 1 ? ", " : "") + (whole ? std::to_string(v + 1) : fmt::format("{}", v / 100.0));
    }
    text += "]\n";
  }
  const InputError e = parse_error(text);
  INFO(e.what());
  CHECK(e.key == "sweep");
  CHECK(e.line == 3);  // the sweep mapping starts on its first key's line
  CHECK_THAT(e.message, Catch::Contains("more than 10000 scenarios"));
  // 4 keys of 10 values (10^4 scenarios) are still a study.
  std::string small = "name: ok\nfit: { max_iterations: 2 }\nsweep:\n";
  for (const char* k : {"logging.privilege", "logging.temperature", "fit.tolerance", "assurance"}) {
    small += std::string("  ") + k + ": [";
    for (int v = 1; v <= 10; ++v) small += (v > 1 ? ", " : "") + fmt::format("{}", v / 100.0);
    small += "]\n";
  }
  CHECK(parse(small).scenarios.size() == 10000);
}

TEST_CASE("study limits: more than 10^7 units are refused at the written factor that drives them",
          "[study_file][limits]") {
  // draws and replicates are each within their limits; their product is not (computed in 64 bits).
  // Of the factors the study writes, the largest is named, at its line.
  check_error("name: many\nenvironment: { draws: 100000 }\nreplicates: 101\n", 2, "environment.draws",
              "makes more than 10000000 units");
  check_error("name: many\nenvironment: { draws: 101 }\nreplicates: 100000\n", 3, "replicates",
              "makes more than 10000000 units");
  CHECK(parse("name: many\nenvironment: { draws: 100000 }\nreplicates: 100\n").scenarios.size() == 1);
  // Across scenarios: 2 scenarios of 10^7 / 2 + 1 units each.
  const InputError e = parse_error("name: many\nenvironment: { draws: 50001 }\nreplicates: 100\nsweep: { fit.prior: [0.1, 0.2] }\n");
  CHECK(e.key == "environment.draws");
  CHECK_THAT(e.message, Catch::Contains("2 scenarios"));
  // Before, replicates (not written) was named at line 1 when draws and the sweep drove it.
  check_error("name: many\n\nenvironment:\n  draws: 100000\nsweep: { fit.prior: [0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, "
              "0.9, 1.0, 1.1] }\n",
              4, "environment.draws", "11 scenarios");
  // A sweep of more scenarios than draws or replicates: the sweep is named.
  std::string sweep = "name: many\nenvironment: { draws: 1000 }\nsweep:\n  fit.prior: [";
  for (int i = 1; i <= 2000; ++i) sweep += (i > 1 ? ", " : "") + std::to_string(i);
  sweep += "]\n";
  check_error(sweep, 4, "sweep", "2000 scenarios");
  // A swept factor is named by its sweep entry.
  const InputError s = parse_error("name: many\nenvironment: { draws: 100 }\nsweep: { replicates: [10, 100000] }\n");
  CHECK(s.key == "sweep.replicates[1]");
  CHECK(s.line == 3);
}

TEST_CASE("study limits: a budget list of more than 100 budgets is refused before its budgets are read",
          "[study_file][limits]") {
  // The review's 98 KB file: pilot [1..10000] and logged [0..9999]. Before, it was read whole and
  // `check` allocated gigabytes counting 3 x 10^8 cells, ending in std::bad_alloc (exit 1).
  std::string pilot = "[", logged = "[";
  for (int i = 0; i < 10000; ++i) {
    pilot += (i ? ", " : "") + std::to_string(i + 1);
    logged += (i ? ", " : "") + std::to_string(i);
  }
  const std::string big = "name: grid\nbudgets:\n  logged: " + logged + "]\n  pilot: " + pilot + "]\n";
  check_error(big, 3, "budgets.logged", "lists 10000 budgets, more than the 100 a list may hold");
  std::string list = "[";
  for (int i = 1; i <= 101; ++i) list += (i > 1 ? ", " : "") + std::to_string(i);
  check_error("name: grid\nbudgets:\n  pilot: " + list + "]\n", 3, "budgets.pilot", "lists 101 budgets");
  // 100 is accepted.
  list = "[";
  for (int i = 1; i <= 100; ++i) list += (i > 1 ? ", " : "") + std::to_string(i);
  CHECK(parse("name: grid\nbudgets:\n  pilot: " + list + "]\n  logged: " + list + "]\n")
            .scenarios[0]
            .settings.pilot_budgets.size() == 100);
}

TEST_CASE("study limits: an inline model with a reward of 1e308 is refused, located in the study",
          "[study_file][limits]") {
  std::string inline_model;
  std::istringstream lines(model_text);
  for (std::string line; std::getline(lines, line);) inline_model += "    " + line + "\n";
  const std::string text = "name: huge-reward\nenvironment:\n  model:\n" + inline_model;
  const std::string bad = std::regex_replace(text, std::regex("rewards: \\[0, 0.5, 1\\]"), "rewards: [0, 1e308, 1]");
  REQUIRE(bad != text);
  check_error(bad, 16, "environment.model.rewards[1]", "must be at most 1e+100 in absolute value");
}
