// End-to-end checks of `dobudget report` (issue 12) on a run with a sweep: the page, the methods
// text, report.html and every figure in three formats; --target and --assurance read as `answer`
// reads them, bad values refused with exit code 2 before anything is written.
#include <catch2/catch.hpp>

#include <filesystem>
#include <string>

#include "cli_harness.hpp"

using namespace cli_test;
namespace fs = std::filesystem;

TEST_CASE("report: a run with a sweep, --target and --assurance as in answer", "[cli][report]") {
  Scratch s("report");
  write(s / "study.yaml", std::string(tiny_study) + "sweep:\n  logging.privilege: [0.0, 1.0]\n");
  auto p = run("plan " + (s / "study.yaml").string() + " --quiet --out " + (s / "run").string());
  INFO(p.out);
  REQUIRE(p.code == 0);

  // Bad options: exit code 2, the option named, no report written.
  const auto not_measured = run("report " + (s / "run").string() + " --target return_gap=0.1");
  CHECK(not_measured.code == 2);
  CHECK(not_measured.out.find("this study did not measure return_gap") != std::string::npos);
  const auto bad_assurance = run("report " + (s / "run").string() + " --assurance 1.5");
  CHECK(bad_assurance.code == 2);
  CHECK(bad_assurance.out.find("--assurance") != std::string::npos);
  const auto bad_target = run("report " + (s / "run").string() + " --target model_kl=-1");
  CHECK(bad_target.code == 2);
  CHECK(bad_target.out.find("--target model_kl=-1: expected MEASURE=VALUE") != std::string::npos);
  CHECK_FALSE(fs::exists(s / "run" / "report"));

  const auto r = run("report " + (s / "run").string() + " --target model_kl=0.1 --assurance 0.9");
  INFO(r.out);
  REQUIRE(r.code == 0);
  const fs::path rep = s / "run" / "report";
  for (const char* f : {"report.md", "report.html", "methods.txt"}) CHECK(fs::is_regular_file(rep / f));
  // 2 scenarios x 1 measure x 4 figures, each in three formats.
  CHECK(r.out.find("8 figures, each as PNG, PDF and SVG") != std::string::npos);
  for (int sc = 0; sc < 2; ++sc)
    for (const std::string kind : {"", "-success", "-needed-by-target", "-needed-by-logged"})
      for (const char* ext : {".png", ".pdf", ".svg", ".dat", ".gp"}) {
        const fs::path f = rep / ("scenario-" + std::to_string(sc) + "-model_kl" + kind + ext);
        INFO(f.string());
        CHECK(fs::is_regular_file(f));
      }
  // The report's target and assurance are the ones given, in the tables and in the methods text.
  const std::string md = slurp(rep / "report.md");
  CHECK(md.find("model_kl at most 0.1 (assurance 90%)") != std::string::npos);
  const std::string methods = slurp(rep / "methods.txt");
  CHECK(methods.find("model_kl at most 0.1 with assurance 90%") != std::string::npos);
  CHECK(methods.find("swept logging.privilege over") != std::string::npos);
  CHECK(methods.find("no substitute for a qualified statistician") != std::string::npos);
  CHECK(slurp(rep / "scenario-1-model_kl-needed-by-target.gp").find("study_target = 0.1\n") != std::string::npos);
}
