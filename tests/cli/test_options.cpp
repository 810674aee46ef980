// Hardening: every bad option value is refused with exit code 2 and a message naming the option,
// before anything is read or written (option_values.hpp). Which values are bad follows from each
// option's documented range in `--help`; decimal-only reading of numbers is common practice for
// command-line tools (no hexadecimal, no inf/nan).
#include <catch2/catch.hpp>

#include "cli_harness.hpp"

using namespace cli_test;

TEST_CASE("answer: bad --assurance, --bootstrap and --target values exit 2 naming the option", "[cli][options][hardening]") {
  Scratch s("options-answer");
  write(s / "study.yaml", tiny_study);
  REQUIRE(run("plan " + (s / "study.yaml").string() + " --quiet --out " + (s / "run").string()).code == 0);
  const std::string answer = "answer " + (s / "run").string();
  const std::string csv = slurp(s / "run" / "answer.csv");
  struct Case {
    std::string args, fragment;
  };
  const Case cases[] = {
      {"--assurance 0", "--assurance: expected a number greater than 0 and less than 1, got '0'"},
      {"--assurance -0.5", "--assurance: expected a number greater than 0"},
      {"--assurance 1", "--assurance: expected"},
      {"--assurance nan", "--assurance: expected"},
      {"--assurance 0x1p-1", "--assurance: expected"},
      {"--assurance 0.9abc", "--assurance: expected"},
      {"--bootstrap -5", "--bootstrap: expected a whole number from 0 to 100000, got '-5'"},
      {"--bootstrap 2147483647", "--bootstrap: expected a whole number from 0 to 100000"},
      {"--bootstrap 99999999999999999999", "--bootstrap: expected a whole number"},
      {"--bootstrap 1.5", "--bootstrap: expected a whole number"},
      {"--target model_kl=inf", "--target model_kl=inf: expected MEASURE=VALUE"},
      {"--target model_kl=nan", "--target model_kl=nan: expected MEASURE=VALUE"},
      {"--target model_kl=0x10", "--target model_kl=0x10: expected MEASURE=VALUE"},
      {"--target model_kl=0", "--target model_kl=0: expected MEASURE=VALUE"},
      {"--target model_kl=", "--target model_kl=: expected MEASURE=VALUE"},
      {"--target model_kl=0.1 --target model_kl=0.2", "--target model_kl=0.2: a target for model_kl is given twice"},
      {"--target kl=0.1", "--target kl=0.1: expected MEASURE=VALUE"},
  };
  for (const Case& c : cases) {
    INFO(c.args);
    const Result r = run(answer + " " + c.args);
    INFO(r.out);
    CHECK(r.code == 2);
    CHECK(r.out.find("error: " + c.fragment) != std::string::npos);
    CHECK(r.out.find("internal error") == std::string::npos);
    CHECK(slurp(s / "run" / "answer.csv") == csv);  // nothing rewritten
  }
  // The limits themselves are accepted.
  CHECK(run(answer + " --bootstrap 0").code == 0);
  CHECK(run(answer + " --assurance 0.999 --target model_kl=1e-3 --bootstrap 10").code == 0);
}

TEST_CASE("plan: bad --threads and --shard values exit 2 naming the option and write nothing", "[cli][options][hardening]") {
  Scratch s("options-plan");
  write(s / "study.yaml", tiny_study);
  struct Case {
    std::string args, fragment;
  };
  const Case cases[] = {
      {"--threads 0", "--threads: expected a whole number from 1 to 1024, got '0'"},
      {"--threads -3", "--threads: expected a whole number from 1 to 1024, got '-3'"},
      {"--threads abc", "--threads: expected a whole number from 1 to 1024, got 'abc'"},
      {"--threads 1025", "--threads: expected a whole number from 1 to 1024"},
      {"--threads 2x", "--threads: expected a whole number"},
      {"--shard 4/4", "--shard 4/4: expected K/N with 0 <= K < N"},
      {"--shard -1/4", "--shard -1/4: expected K/N"},
      {"--shard 0/0", "--shard 0/0: expected K/N"},
      {"--shard 1/99999999999", "--shard 1/99999999999: expected K/N"},
      {"--shard 1", "--shard 1: expected K/N"},
      {"--shard ' 1/2'", "--shard  1/2: expected K/N"},
  };
  for (const Case& c : cases) {
    INFO(c.args);
    const Result r = run("plan " + (s / "study.yaml").string() + " --quiet --out " + (s / "run").string() + " " + c.args);
    INFO(r.out);
    CHECK(r.code == 2);
    CHECK(r.out.find("error: " + c.fragment) != std::string::npos);
    CHECK_FALSE(std::filesystem::exists(s / "run"));
  }
}
