// dobudget simulate: the episodes file it writes reads back (io/episode_file.hpp) to the same
// episodes, codes and lengths that simulate_records (core/world/episode_records.hpp) makes for
// the study's world; the codebook carries that world's rewards bit for bit; the episode streams
// are their own (--seed moves the episodes, not the world; logged episodes do not depend on the
// pilot count); bad options exit 2 with nothing written.
#include <catch2/catch.hpp>

#include <vector>

#include "cli_harness.hpp"
#include "core/world/episode_records.hpp"
#include "io/episode_file.hpp"
#include "io/study_file.hpp"

using namespace cli_test;

namespace {

std::vector<int> episode(const dobudget::Dataset& d, int i, bool actions) {
  return actions ? std::vector<int>(d.act(i), d.act(i) + d.length(i))
                 : std::vector<int>(d.obs(i), d.obs(i) + d.length(i) + 1);
}

void require_same(const dobudget::Dataset& a, const dobudget::Dataset& b) {
  REQUIRE(a.count == b.count);
  REQUIRE(a.horizon == b.horizon);
  CHECK(a.lengths == b.lengths);
  for (int i = 0; i < a.count; ++i) {
    CHECK(episode(a, i, false) == episode(b, i, false));
    CHECK(episode(a, i, true) == episode(b, i, true));
  }
}

}  // namespace

TEST_CASE("simulate then import gives back the same episodes, codes and lengths", "[cli][simulate]") {
  Scratch s("simulate-roundtrip");
  write(s / "study.yaml", tiny_study);
  const auto r = run("simulate " + (s / "study.yaml").string() + " --logged 40 --pilot 7 --draw 1 --out " +
                     (s / "e.csv").string() + " --codebook-out " + (s / "c.yaml").string());
  INFO(r.out);
  REQUIRE(r.code == 0);
  CHECK(r.out.find("40 logged and 7 pilot episodes of 4 actions (235 rows) of world 1") != std::string::npos);
  const dobudget::Study study = dobudget::io::load_study(s / "study.yaml");
  const auto expected = dobudget::simulate_records(study.scenarios[0].settings, study.seed, 1, study.seed, 40, 7);
  const dobudget::io::Codebook book = dobudget::io::read_codebook(s / "c.yaml");
  CHECK(book.observations == std::vector<std::string>{"o0", "o1"});
  CHECK(book.actions == std::vector<std::string>{"a0", "a1"});
  const auto& rewards = expected.world.model.rewards;
  CHECK(book.rewards == std::vector<double>(rewards.data(), rewards.data() + rewards.size()));  // bit for bit
  for (const dobudget::io::Codebook* with : {&book, static_cast<const dobudget::io::Codebook*>(nullptr)}) {
    const auto back = dobudget::io::read_episodes(s / "e.csv", with);
    require_same(back.logged, expected.logged);
    require_same(back.pilot, expected.pilot);
    CHECK(back.logged_ids.front() == "logged-0");
    CHECK(back.pilot_ids.back() == "pilot-6");
  }
}

TEST_CASE("simulate: --seed moves the episodes only; logged episodes do not depend on the pilot count",
          "[cli][simulate]") {
  Scratch s("simulate-seed");
  write(s / "study.yaml", tiny_study);
  const std::string base = "simulate " + (s / "study.yaml").string() + " --logged 10 ";
  REQUIRE(run(base + "--out " + (s / "a.csv").string() + " --codebook-out " + (s / "a.yaml").string()).code == 0);
  REQUIRE(run(base + "--pilot 5 --out " + (s / "b.csv").string()).code == 0);
  REQUIRE(run(base + "--seed 99 --out " + (s / "c.csv").string() + " --codebook-out " + (s / "c.yaml").string()).code == 0);
  REQUIRE(run(base + "--seed 7 --out " + (s / "d.csv").string()).code == 0);  // 7 is the study's seed
  const auto a = dobudget::io::read_episodes(s / "a.csv", nullptr);
  const auto b = dobudget::io::read_episodes(s / "b.csv", nullptr);
  require_same(a.logged, b.logged);
  CHECK(b.pilot.count == 5);
  CHECK(slurp(s / "c.yaml") == slurp(s / "a.yaml"));  // the same world
  CHECK(slurp(s / "c.csv") != slurp(s / "a.csv"));    // other episodes
  CHECK(slurp(s / "d.csv") == slurp(s / "a.csv"));
}

TEST_CASE("simulate: bad options exit 2 naming the option, nothing written", "[cli][simulate][hardening]") {
  Scratch s("simulate-bad");
  write(s / "study.yaml", tiny_study);  // draws: 2
  const std::string base = "simulate " + (s / "study.yaml").string() + " --out " + (s / "e.csv").string() + " ";
  struct Case {
    std::string args, fragment;
  };
  const Case cases[] = {
      {"--logged 5 --draw 2", "--draw: expected a whole number from 0 to 1, got '2'"},
      {"--logged -1", "--logged: expected a whole number from 0 to 10000000, got '-1'"},
      {"--logged 5 --pilot x", "--pilot: expected a whole number"},
      {"--logged 0", "no episodes asked for"},
      {"--logged 5 --seed -3", "--seed: expected a whole number from 0 to 18446744073709551615"},
      {"--logged 5000000 --pilot 5000000", "more than the 25000000 dobudget writes"},
      {"--logged 5 --codebook-out " + (s / "e.csv").string(), "--codebook-out: names the same file as --out"},
  };
  for (const Case& c : cases) {
    INFO(c.args);
    const auto r = run(base + c.args);
    CHECK(r.code == 2);
    CHECK(r.out.find(c.fragment) != std::string::npos);
    CHECK_FALSE(std::filesystem::exists(s / "e.csv"));
  }
  write(s / "bad.yaml", "name: x\nenvironment: {horizon: 0}\n");
  const auto r = run("simulate " + (s / "bad.yaml").string() + " --logged 5 --out " + (s / "e.csv").string());
  CHECK(r.code == 2);
  CHECK(r.out.find("bad.yaml:2: environment.horizon: ") != std::string::npos);
  CHECK_FALSE(std::filesystem::exists(s / "e.csv"));
}
