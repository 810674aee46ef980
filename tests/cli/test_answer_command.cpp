// End-to-end checks of `dobudget answer` (issue 4): re-analysis of stored rows gives the same
// answer as `plan` for the same targets, new targets change it without simulating, and a sweep
// shows the swept values and the worst case. Properties fixed by docs/design.md, "The answer", and docs/run-directory.md.
#include <catch2/catch.hpp>

#include <sstream>
#include <vector>

#include "cli_harness.hpp"

using namespace cli_test;

TEST_CASE("answer: re-analysis reproduces plan's answer.csv and table", "[cli][answer]") {
  Scratch s("answer");
  write(s / "study.yaml", tiny_study);
  auto p = run("plan " + (s / "study.yaml").string() + " --quiet --out " + (s / "run").string());
  REQUIRE(p.code == 0);
  const std::string csv = slurp(s / "run" / "answer.csv");
  const std::string md = slurp(s / "run" / "answer.md");
  auto a = run("answer " + (s / "run").string());
  REQUIRE(a.code == 0);
  CHECK(slurp(s / "run" / "answer.csv") == csv);
  CHECK(slurp(s / "run" / "answer.md") == md);
  // The table printed by plan appears verbatim in answer's output.
  const auto start = p.out.find("scenario  measure");
  REQUIRE(start != std::string::npos);
  const std::string table = p.out.substr(start, p.out.find("\n\n", start) - start);
  CHECK(a.out.find(table) != std::string::npos);

  // A new target: answer.csv changes, runs.csv does not.
  const std::string runs = slurp(s / "run" / "runs.csv");
  auto b = run("answer " + (s / "run").string() + " --target model_kl=0.5 --assurance 0.9");
  REQUIRE(b.code == 0);
  CHECK(slurp(s / "run" / "answer.csv") != csv);
  CHECK(slurp(s / "run" / "answer.csv").find("model_kl,0.5,0.9,") != std::string::npos);
  CHECK(slurp(s / "run" / "runs.csv") == runs);

  // Bad options: exit code 2.
  CHECK(run("answer " + (s / "run").string() + " --target return_gap=0.1").code == 2);  // not measured
  CHECK(run("answer " + (s / "run").string() + " --target model_kl=-1").code == 2);
  CHECK(run("answer " + (s / "run").string() + " --criterion median").code == 2);
  CHECK(run("answer " + (s / "nothing").string()).code == 2);
}

TEST_CASE("answer: a sweep shows the swept values and the worst case", "[cli][answer]") {
  Scratch s("sweep");
  write(s / "study.yaml", std::string(tiny_study) + "sweep:\n  logging.privilege: [0.0, 1.0]\n");
  auto p = run("plan " + (s / "study.yaml").string() + " --quiet --out " + (s / "run").string());
  INFO(p.out);
  REQUIRE(p.code == 0);
  CHECK(p.out.find("logging.privilege  measure") != std::string::npos);
  CHECK(p.out.find("worst case over the swept scenarios") != std::string::npos);
  CHECK(slurp(s / "run" / "answer.md").find("Worst case over the scenarios") != std::string::npos);
  const std::string runs = slurp(s / "run" / "runs.csv");
  CHECK(runs.find("\n1,0,0,pilot-only,") != std::string::npos);  // scenario 1 rows exist

  // Paired scenarios (seeding.hpp, unit_stream_key): the privilege enters only the logger, so the
  // pilot-only rows of both scenarios are byte-identical after the scenario column, and so are
  // their answers; the regime-aware rows, which fit the logged data, differ.
  auto lines_of = [](const std::string& text, const std::string& scenario, const std::string& strategy) {
    std::vector<std::string> out;
    std::istringstream in(text);
    std::string line;
    while (std::getline(in, line)) {
      const auto comma = line.find(',');
      if (line.substr(0, comma) == scenario && line.find("," + strategy + ",") != std::string::npos)
        out.push_back(line.substr(comma));
    }
    return out;
  };
  const auto a0 = lines_of(runs, "0", "pilot-only"), a1 = lines_of(runs, "1", "pilot-only");
  CHECK(a0.size() == 2 * 3 * 2 * 2);  // draws x replicates x logged x pilot
  CHECK(a0 == a1);
  CHECK(lines_of(runs, "0", "regime-aware") != lines_of(runs, "1", "regime-aware"));
  const std::string answers = slurp(s / "run" / "answer.csv");
  CHECK_FALSE(lines_of(answers, "0", "pilot-only").empty());
  CHECK(lines_of(answers, "0", "pilot-only") == lines_of(answers, "1", "pilot-only"));
}
