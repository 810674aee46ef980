// End-to-end checks that `answer` and `report` re-analyse only a finished run directory they can
// trust (io/finished_run.hpp): a runs.csv cut short, header-only, with an extra or repeated row or a
// negative model_kl, and a study.resolved.yaml edited after planning, are refused with exit code 2
// and a message naming the file, the line and the column, and nothing is written; so are a pipe in
// place of any of its files (at once, never waited on) and a directory where nothing records the
// study hash planned.
#include <catch2/catch.hpp>
#include <sys/stat.h>

#include "cli_harness.hpp"

using namespace cli_test;

namespace {

namespace fs = std::filesystem;

}  // namespace

TEST_CASE("answer and report: a damaged runs.csv or an edited study.resolved.yaml is refused with its location",
          "[cli][answer][report][finished_run]") {
  Scratch s("finished-run");
  write(s / "study.yaml", tiny_study);
  const Result p = run("plan " + (s / "study.yaml").string() + " --quiet --out " + (s / "run").string());
  INFO(p.out);
  REQUIRE(p.code == 0);
  const fs::path runs_file = s / "run" / "runs.csv", resolved_file = s / "run" / "study.resolved.yaml";
  const std::string runs = slurp(runs_file), resolved = slurp(resolved_file), answer = slurp(s / "run" / "answer.csv");
  const std::vector<std::string> all = lines(runs);
  REQUIRE(all.size() == 1 + 6 * 12);  // header, 6 units of 3 strategies x 2 logged x 2 pilot

  std::vector<std::string> negative = all;  // line 14: model_kl (the 7th cell) = -0.3
  {
    std::string& l = negative[13];
    std::size_t at = 0;
    for (int k = 0; k < 6; ++k) at = l.find(',', at) + 1;
    l = l.substr(0, at) + "-0.3" + l.substr(l.find(',', at));
  }
  std::vector<std::string> repeated = all;  // line 3 repeats line 2 (pilot 5 where 20 belongs)
  repeated[2] = repeated[1];
  std::vector<std::string> extra = all;
  extra.push_back(all.back());

  struct Case {
    const char* what;
    std::string runs_csv, resolved_yaml;
    std::string location;  // the start of the message after "error: "
  };
  const std::vector<Case> cases{
      {"cut in half", join_lines({all.begin(), all.begin() + 37}), resolved,
       runs_file.string() + ":38: missing row"},
      {"header only", join_lines({all[0]}), resolved, runs_file.string() + ":2: missing row"},
      {"an extra row", join_lines(extra), resolved, runs_file.string() + ":74: a row beyond the study's 72 rows"},
      {"a repeated row", join_lines(repeated), resolved, runs_file.string() + ":3: pilot: expected 20, got 5"},
      {"a negative model_kl", join_lines(negative), resolved,
       runs_file.string() + ":14: model_kl: must be at least 0, got -0.3"},
      {"an edited study.resolved.yaml", runs, resolved + "replicates: 3\n",
       resolved_file.string() + ": has study hash"},
  };
  for (const Case& c : cases) {
    write(runs_file, c.runs_csv);
    write(resolved_file, c.resolved_yaml);
    fs::remove_all(s / "run" / "report");
    for (const std::string command : {"answer", "report"}) {
      const Result r = run(command + " " + (s / "run").string());
      INFO(c.what << ", " << command << ":\n" << r.out);
      CHECK(r.code == 2);
      CHECK(r.out.find("error: " + c.location) != std::string::npos);
      CHECK(slurp(s / "run" / "answer.csv") == answer);  // nothing rewritten
      CHECK_FALSE(fs::exists(s / "run" / "report" / "report.md"));
    }
  }

  // Restored, both go through again.
  write(runs_file, runs);
  write(resolved_file, resolved);
  CHECK(run("answer " + (s / "run").string()).code == 0);
  CHECK(slurp(s / "run" / "answer.csv") == answer);
  const Result rep = run("report " + (s / "run").string());
  INFO(rep.out);
  CHECK(rep.code == 0);
}

TEST_CASE("answer and report: a pipe in place of a run file is refused at once; so is a directory without "
          "manifest.json or journal header",
          "[cli][answer][report][finished_run]") {
  // The reproduced bugs: with a pipe (mkfifo) as units.journal, answer and report blocked reading
  // its first line; with manifest.json and units.journal both removed, an edited
  // study.resolved.yaml was trusted.
  Scratch s("finished-run-kinds");
  write(s / "study.yaml", tiny_study);
  const Result p = run("plan " + (s / "study.yaml").string() + " --quiet --out " + (s / "run").string());
  INFO(p.out);
  REQUIRE(p.code == 0);
  const fs::path dir = s / "run";
  const std::string answer = slurp(dir / "answer.csv");
  for (const char* name : {"units.journal", "manifest.json", "runs.csv", "timings.csv", "study.resolved.yaml"}) {
    const fs::path file = dir / name;
    const std::string kept = slurp(file);
    fs::remove(file);
    REQUIRE(::mkfifo(file.c_str(), 0644) == 0);
    for (const std::string command : {"answer", "report"}) {
      const Result r = run_within(20, command + " " + dir.string());
      INFO(name << ", " << command << ":\n" << r.out);
      CHECK(r.code == 2);  // not 137: it did not hang until killed
      CHECK(r.out.find("error: " + file.string() + ": is not a regular file but a pipe (FIFO)") != std::string::npos);
      CHECK(slurp(dir / "answer.csv") == answer);
      CHECK_FALSE(fs::exists(dir / "report" / "report.md"));
    }
    fs::remove(file);
    write(file, kept);
  }

  fs::remove(dir / "manifest.json");
  fs::remove(dir / "units.journal");
  write(dir / "study.resolved.yaml", slurp(dir / "study.resolved.yaml") + "# edited\n");
  for (const std::string command : {"answer", "report"}) {
    const Result r = run(command + " " + dir.string());
    INFO(command << ":\n" << r.out);
    CHECK(r.code == 2);
    CHECK(r.out.find("error: " + dir.string() + ": has no manifest.json") != std::string::npos);
    CHECK(slurp(dir / "answer.csv") == answer);
  }
}
