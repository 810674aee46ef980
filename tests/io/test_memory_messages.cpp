// The memory refusal (src/io/memory_messages.hpp): located at the study key that drives the
// largest part, with a real line, and naming every driver with its value.
#include <catch2/catch.hpp>

#include <string>

#include "core/running/memory_estimate.hpp"
#include "io/memory_messages.hpp"
#include "io/study_file.hpp"

using namespace dobudget;

namespace {

// The refusal of `text` (a study) on a machine of `available` bytes, with `threads` units at once.
std::optional<io::InputError> mm_refusal(const std::string& text, double available, int threads = 2) {
  const Study study = io::parse_study(text, "study.yaml");
  return io::memory_refusal(estimate_memory(study, threads), {available, "physical memory"}, "study.yaml", text);
}

}  // namespace

TEST_CASE("memory refusal: the largest budget drives the datasets, named at its line", "[memory_messages]") {
  const std::string text = "name: huge\nenvironment: { horizon: 5000 }\nbudgets:\n  logged: [0, 20]\n  pilot: [5, 10000000]\n";
  const auto e = mm_refusal(text, 16e9);
  REQUIRE(e);
  INFO(e->what());
  CHECK(e->line == 5);
  CHECK(e->key == "budgets.pilot");
  CHECK_THAT(e->message, Catch::StartsWith("the estimated peak memory, ") &&
                             Catch::Contains("is more than the 16 GB this process may use (physical memory)") &&
                             Catch::Contains("the largest part is datasets, 800 GB") &&
                             Catch::Contains("driven by budgets.pilot (10000000 episodes, the largest budget), "
                                             "environment.horizon (5000), budgets.logged (20 episodes, the largest budget)"));
  CHECK_FALSE(mm_refusal(text, 0.0));   // unknown memory: no refusal
  CHECK_FALSE(mm_refusal(text, 1e15));  // enough memory
}

TEST_CASE("memory refusal: rows kept for many units are named at the written count that drives them, not replicates",
          "[memory_messages]") {
  // Before, the results part was always named `replicates` (the first of its keys), at line 0,
  // even when the budget lists made the rows; and replicates was named when it was not written.
  std::string pilot = "[";
  for (int i = 1; i <= 100; ++i) pilot += (i > 1 ? ", " : "") + std::to_string(i);
  pilot += "]";
  const std::string lists = "name: rows\nenvironment: { draws: 1000 }\nbudgets:\n  pilot: " + pilot +
                            "\n  logged: " + pilot + "\n";
  const auto e = mm_refusal(lists, 1e9);
  REQUIRE(e);
  INFO(e->what());
  CHECK(e->key == "environment.draws");  // 1000, beside 100 budgets each and the default 10 replicates
  CHECK(e->line == 2);
  CHECK_THAT(e->message, Catch::Contains("results kept until the tables are written") &&
                             Catch::Contains("driven by environment.draws (1000), budgets.logged (100 budgets), "
                                             "budgets.pilot (100 budgets), replicates (10), strategies (3 strategies), "
                                             "sweep (1 scenarios)"));
  // A swept key is named by its sweep entry, at its line.
  const auto swept = mm_refusal("name: rows\nbudgets:\n  pilot: " + pilot + "\n  logged: " + pilot +
                                    "\nsweep:\n  fit.prior: [0.1, 0.2]\n  replicates: [1000, 3000]\n",
                                1e9);
  REQUIRE(swept);
  INFO(swept->what());
  CHECK(swept->key == "sweep.replicates");
  CHECK(swept->line == 7);
}

TEST_CASE("memory refusal: when only defaults drive it, the largest is named at its section or line 1",
          "[memory_messages]") {
  // The example study on a machine of 1 kB: its largest part is the evaluation histories (1000
  // trajectories of horizon 8, two units at once), driven by evaluation.trajectories, not written.
  const auto e = mm_refusal("name: small\n", 1000.0);
  REQUIRE(e);
  INFO(e->what());
  CHECK(e->key == "evaluation.trajectories");
  CHECK(e->line == 1);
  CHECK_THAT(e->message, Catch::Contains("the largest part is evaluation histories"));
  // With its section written, at the section's line.
  const auto s = mm_refusal("name: small\nseed: 3\nevaluation:\n  policy: uniform\n", 1000.0);
  REQUIRE(s);
  CHECK(s->key == "evaluation.trajectories");
  CHECK(s->line == 4);
}

TEST_CASE("memory messages: part names and byte counts", "[memory_messages]") {
  CHECK(io::memory_part_name(MemoryPartId::datasets) == "datasets");
  CHECK(io::memory_part_name(MemoryPartId::results) == "results kept until the tables are written");
  CHECK(io::format_bytes(1.5e9) == "1.5 GB");
  CHECK(io::format_bytes(999) == "999 bytes");
  CHECK(io::format_bytes(320e6) == "320 MB");
}
