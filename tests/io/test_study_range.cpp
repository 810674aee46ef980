// The range mode's study keys (issue 10): budgets.pilot as { from, to }, top-level precision,
// budgets.pilot_rounds (written by range-mode runs into each round's study). Every bad value is
// one located message naming its key; the resolved YAML reads back to the same study.
#include <catch2/catch.hpp>

#include <string>

#include "core/answer/precision_search.hpp"
#include "input_error_of.hpp"
#include "io/input_error.hpp"
#include "io/study_file.hpp"

using namespace dobudget;
using dobudget::test::error_of;
using io::InputError;
using io::parse_study;

namespace {

void check_error(const std::string& text, int line, const std::string& key, const std::string& fragment) {
  INFO("study:\n" << text);
  const InputError e = error_of([&] { parse_study(text, "bad.yaml"); });
  INFO("error: " << e.what());
  CHECK(e.line == line);
  CHECK(e.key == key);
  CHECK_THAT(e.message, Catch::Contains(fragment));
  CHECK_THAT(std::string(e.what()), Catch::StartsWith("bad.yaml:" + std::to_string(line) + ": " + key + ": "));
}

}  // namespace

TEST_CASE("range mode: budgets.pilot { from, to } and precision are read, defaulted and written back",
          "[study_file][range]") {
  const Study s = parse_study("name: r\nbudgets: { pilot: { from: 10, to: 3000 } }\nprecision: { relative: 0.05 }\n",
                              "s.yaml");
  REQUIRE(s.precision);
  CHECK(s.precision->relative == 0.05);
  CHECK(s.precision->max_core_hours == 2.0);  // the default
  const ScenarioSettings& st = s.scenarios.front().settings;
  REQUIRE(st.pilot_range);
  CHECK(st.pilot_range->from == 10);
  CHECK(st.pilot_range->to == 3000);
  // Round 1's grid: 10 x 300^(k/4), k = 0..4, rounded (10, 41.6, 173.2, 720.8, 3000).
  CHECK(st.pilot_budgets == std::vector<int>{10, 42, 173, 721, 3000});
  const std::string yaml = io::resolved_yaml(s);
  CHECK_THAT(yaml, Catch::Contains("pilot: {from: 10, to: 3000}"));
  CHECK_THAT(yaml, Catch::Contains("max_core_hours: 2"));
  CHECK(io::resolved_yaml(parse_study(yaml, "s.yaml")) == yaml);

  // A range without `precision` gets the default precision.
  const Study d = parse_study("name: r\nbudgets: { pilot: { from: 5, to: 50 } }\n", "s.yaml");
  REQUIRE(d.precision);
  CHECK(d.precision->relative == 0.1);

  // A round's study: a plain list with the round of each budget.
  const Study r = parse_study("name: r\nbudgets: { pilot: [10, 20, 40], pilot_rounds: [1, 2, 1] }\n", "s.yaml");
  CHECK(!r.precision);
  CHECK(r.scenarios.front().settings.pilot_rounds == std::vector<int>{1, 2, 1});
  const std::string ryaml = io::resolved_yaml(r);
  CHECK_THAT(ryaml, Catch::Contains("pilot_rounds: [1, 2, 1]"));
  CHECK(io::resolved_yaml(parse_study(ryaml, "s.yaml")) == ryaml);
}

TEST_CASE("range mode: bad from, to, precision and pilot_rounds are refused with the key named", "[study_file][range]") {
  check_error("name: r\nbudgets:\n  pilot: { from: 300, to: 10 }\n", 3, "budgets.pilot.to",
              "must be larger than budgets.pilot.from (300)");
  check_error("name: r\nbudgets:\n  pilot: { from: 10, to: 10 }\n", 3, "budgets.pilot.to", "must be larger");
  check_error("name: r\nbudgets:\n  pilot: { from: 0, to: 10 }\n", 3, "budgets.pilot.from", "at least 1");
  check_error("name: r\nbudgets:\n  pilot: { from: 10, to: 20000000 }\n", 3, "budgets.pilot.to", "at most 10000000");
  check_error("name: r\nbudgets:\n  pilot: { from: 10 }\n", 3, "budgets.pilot", "to is missing");
  check_error("name: r\nbudgets:\n  pilot: { from: 10, to: 100, step: 2 }\n", 3, "budgets.pilot.step", "");
  check_error("name: r\nbudgets: { pilot: { from: 10, to: 100 } }\nprecision: { relative: 0 }\n", 3,
              "precision.relative", "must be in (0, 1)");
  check_error("name: r\nbudgets: { pilot: { from: 10, to: 100 } }\nprecision: { relative: 1 }\n", 3,
              "precision.relative", "must be in (0, 1)");
  check_error("name: r\nbudgets: { pilot: { from: 10, to: 100 } }\nprecision: { relative: -0.1 }\n", 3,
              "precision.relative", "must be in (0, 1)");
  check_error("name: r\nbudgets: { pilot: { from: 10, to: 100 } }\nprecision: { max_core_hours: 0 }\n", 3,
              "precision.max_core_hours", "in (0, 1e6]");
  check_error("name: r\nbudgets: { pilot: { from: 10, to: 100 } }\nprecision: { relativ: 0.1 }\n", 3,
              "precision.relativ", "relative");
  check_error("name: r\nbudgets: { pilot: [10, 100] }\nprecision: { relative: 0.1 }\n", 3, "precision",
              "needs budgets.pilot as a range");
  check_error("name: r\nbudgets: { pilot: [10, 100], pilot_rounds: [1] }\n", 2, "budgets.pilot_rounds",
              "one round per pilot budget (2), got 1");
  check_error("name: r\nbudgets: { pilot: [10, 100], pilot_rounds: [1, 0] }\n", 2, "budgets.pilot_rounds[1]",
              "at least 1");
  check_error("name: r\nbudgets: { pilot: { from: 10, to: 100 }, pilot_rounds: [1] }\n", 2, "budgets.pilot_rounds",
              "cannot be combined with a range");
}
