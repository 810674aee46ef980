// End-to-end checks of the range mode (issue 10, item 3; src/io/precision_run.hpp,
// src/core/answer/precision_search.hpp): budgets.pilot { from, to } with `precision`.
//
// The model has one hidden state, one action and four outcomes, so a fitted model (one latent
// value: fit.latent_states 1) is the multinomial MAP under the Dirichlet prior,
//   q_hat = (counts + prior) / (N + 4 prior),   N = n (H + 1) observations in n pilot episodes,
// and its model_kl (model_kl.hpp: the predictive of every observation is the emission row, for
// the truth and for the fit) is KL(p || q_hat). The success probability at n,
//   P_n = Pr[ KL(p || q_hat) <= target ],   counts ~ Multinomial(N, p),
// is computed here by an independent Monte Carlo that draws the counts directly (Boost.Random,
// multinomial by conditional binomials: count_j ~ Binomial(N - sum_{i<j} count_i,
// p_j / (1 - sum_{i<j} p_i)), a standard construction, e.g. Devroye, "Non-Uniform Random
// Variate Generation", 1986, ch. XI, from memory), none of the project's pipeline involved. The
// true crossing is the smallest n with P_n >= assurance (bisection; P_n rises with n).
#include <catch2/catch.hpp>

#include <boost/random/binomial_distribution.hpp>
#include <boost/random/mersenne_twister.hpp>

#include <cmath>
#include <cstdlib>
#include <string>
#include <vector>

#include "cli_harness.hpp"

using namespace cli_test;

namespace {

namespace fs = std::filesystem;

const double truth[4] = {0.4, 0.3, 0.2, 0.1};
constexpr int horizon = 1;
constexpr double prior = 0.1;
constexpr double target = 0.01;
constexpr double assurance = 0.8;

const char* range_study = R"(name: multinomial
seed: 5
environment:
  horizon: 1
  model:
    states: 1
    actions: 1
    observations: 4
    initial: [1.0]
    transitions: [[[1.0]]]
    emissions: [[0.4, 0.3, 0.2, 0.1]]
    rewards: [0, 0, 0, 0]
    logging_policy: [[1.0]]
budgets: { logged: [0], pilot: { from: 5, to: 600 } }
replicates: 40
strategies: [pilot-only]
measures: [model_kl]
fit: { latent_states: 1, restarts: 1, max_restarts: 2, prior: 0.1 }
evaluation: { trajectories: 5 }
targets: { model_kl: 0.01 }
assurance: 0.8
precision: { relative: 0.1, max_core_hours: 1 }
)";

// P_n by Monte Carlo with `draws` multinomial samples (see the header).
double success_probability(int n, int draws, boost::random::mt19937_64& rng) {
  const int N = n * (horizon + 1);
  int hits = 0;
  for (int k = 0; k < draws; ++k) {
    int left = N;
    double mass = 1.0, kl = 0.0;
    for (int j = 0; j < 4; ++j) {
      int c = left;
      if (j < 3) {
        boost::random::binomial_distribution<int> b(left, std::min(1.0, truth[j] / mass));
        c = b(rng);
      }
      left -= c;
      mass -= truth[j];
      const double q = (c + prior) / (N + 4.0 * prior);
      kl += truth[j] * std::log(truth[j] / q);
    }
    if (kl <= target) ++hits;
  }
  return static_cast<double>(hits) / draws;
}

// The smallest n in [lo, hi] with P_n >= assurance, by bisection.
int true_crossing(int lo, int hi) {
  boost::random::mt19937_64 rng(20261202);
  while (hi - lo > 1) {
    const int mid = (lo + hi) / 2;
    (success_probability(mid, 200000, rng) >= assurance ? hi : lo) = mid;
  }
  return hi;
}

struct Verdict {
  std::string strategy;
  double needed = 0, low = 0, high = 0, half_width = 0;
  bool met = false;
};

std::vector<Verdict> read_precision(const fs::path& file) {
  std::vector<Verdict> out;
  const auto ls = lines(slurp(file));
  REQUIRE(!ls.empty());
  CHECK(ls[0] == "scenario,measure,strategy,logged,needed_pilot,low,high,relative_half_width,met,why");
  for (std::size_t i = 1; i < ls.size(); ++i) {
    std::vector<std::string> f;
    std::size_t pos = 0;
    for (int k = 0; k < 9; ++k) {
      const std::size_t comma = ls[i].find(',', pos);
      f.push_back(ls[i].substr(pos, comma - pos));
      pos = comma + 1;
    }
    out.push_back({f[2], std::stod(f[4]), std::stod(f[5]), std::stod(f[6]), std::stod(f[7]), f[8] == "yes"});
  }
  return out;
}

}  // namespace

TEST_CASE("range mode: a one-state multinomial model reaches the precision and covers the true crossing",
          "[cli][range]") {
  Scratch s("range-truth");
  write(s / "study.yaml", range_study);
  const Result r = run("plan " + (s / "study.yaml").string() + " --out " + (s / "out").string() + " --threads 2 --quiet");
  INFO(r.out);
  REQUIRE(r.code == 0);
  CHECK_THAT(r.out, Catch::Contains("every answer met the precision"));
  const auto verdicts = read_precision(s / "out" / "precision.csv");
  REQUIRE(verdicts.size() == 1);
  const Verdict& v = verdicts[0];
  // P_n crosses 0.8 near n = chi2_3(0.8) / (2 target) / (H + 1) = 4.64 / 0.02 / 2 = 116 (the
  // chi-square approximation of 2 N KL, from memory); the Monte Carlo gives the exact figure.
  const int crossing = true_crossing(5, 600);
  INFO("true crossing " << crossing << "; range mode " << v.needed << " [" << v.low << ", " << v.high << "]");
  CHECK(crossing > 80);
  CHECK(crossing < 160);
  CHECK(v.met);
  CHECK(v.half_width <= 0.1);
  CHECK((v.high - v.low) / 2.0 / v.needed <= 0.1);
  CHECK(v.low <= crossing);
  CHECK(crossing <= v.high);
  // The rounds went past the coarse grid: budgets were added around the crossing.
  CHECK(fs::exists(s / "out" / "round-2" / "runs.csv"));

  // `answer` on the finished range-mode run works as on a plain run.
  const Result a = run("answer " + (s / "out").string());
  INFO(a.out);
  CHECK(a.code == 0);
  CHECK_THAT(a.out, Catch::Contains("pilot-only"));
}

TEST_CASE("range mode: rounds are deterministic, resumable and the same as the last round run plainly",
          "[cli][range][resume]") {
  Scratch s("range-resume");
  write(s / "study.yaml", range_study);
  const std::string study = (s / "study.yaml").string();
  REQUIRE(run("plan " + study + " --out " + (s / "one").string() + " --threads 1 --quiet").code == 0);
  REQUIRE(run("plan " + study + " --out " + (s / "two").string() + " --threads 2 --quiet").code == 0);
  const std::string runs = slurp(s / "one" / "runs.csv");
  REQUIRE(!runs.empty());
  CHECK(slurp(s / "two" / "runs.csv") == runs);
  CHECK(slurp(s / "two" / "precision.csv") == slurp(s / "one" / "precision.csv"));
  CHECK(slurp(s / "two" / "answer.csv") == slurp(s / "one" / "answer.csv"));

  // The last round's study, run from scratch as a plain study, gives the same rows: a row never
  // depends on the round that computed it.
  int last = 1;
  while (fs::exists(s / "one" / ("round-" + std::to_string(last + 1)))) ++last;
  REQUIRE(last >= 2);
  const fs::path last_study = s / "one" / ("round-" + std::to_string(last)) / "study.resolved.yaml";
  REQUIRE(run("plan " + last_study.string() + " --out " + (s / "plain").string() + " --quiet").code == 0);
  CHECK(slurp(s / "plain" / "runs.csv") == runs);

  // Interrupted in a later round: its journal cut to half its records, the rounds after it and
  // the final tables gone. The same command resumes and ends identical.
  fs::copy(s / "one", s / "cut", fs::copy_options::recursive);
  for (const char* f : {"runs.csv", "timings.csv", "answer.csv", "answer.md", "precision.csv", "manifest.json"})
    fs::remove(s / "cut" / f);
  for (int k = 3; k <= last; ++k) fs::remove_all(s / "cut" / ("round-" + std::to_string(k)));
  const fs::path r2 = s / "cut" / "round-2";
  for (const char* f : {"runs.csv", "timings.csv", "manifest.json"}) fs::remove(r2 / f);
  const auto journal = lines(slurp(r2 / "units.journal"));
  REQUIRE(journal.size() > 4);
  std::vector<std::string> half(journal.begin(), journal.begin() + 1 + static_cast<long>((journal.size() - 1) / 2));
  write(r2 / "units.journal", join_lines(half));
  const Result resumed = run("plan " + study + " --out " + (s / "cut").string() + " --threads 2");
  INFO(resumed.out);
  REQUIRE(resumed.code == 0);
  CHECK_THAT(resumed.out, Catch::Contains("units resumed"));
  CHECK(slurp(s / "cut" / "runs.csv") == runs);
  CHECK(slurp(s / "cut" / "precision.csv") == slurp(s / "one" / "precision.csv"));

  // Stopped by SIGTERM part-way (130; 143 if it came before the handler was set; 0 if the run
  // finished first): the rerun ends identical.
  const Result stopped = run_command("timeout --preserve-status -s TERM 0.5 " + std::string(DOBUDGET_BINARY) + " plan " + study +
                                     " --out " + (s / "term").string() + " --quiet");
  CHECK((stopped.code == 130 || stopped.code == 143 || stopped.code == 0));
  REQUIRE(run("plan " + study + " --out " + (s / "term").string() + " --quiet").code == 0);
  CHECK(slurp(s / "term" / "runs.csv") == runs);
}

TEST_CASE("range mode: shards are refused, and check states the cost as a range", "[cli][range]") {
  Scratch s("range-shard");
  write(s / "study.yaml", range_study);
  const Result r = run("plan " + (s / "study.yaml").string() + " --shard 0/2 --out " + (s / "out").string());
  INFO(r.out);
  CHECK(r.code == 2);
  CHECK_THAT(r.out, Catch::Contains("precision"));
  CHECK_THAT(r.out, Catch::Contains("shards"));
  CHECK(!fs::exists(s / "out"));

  const Result c = run("check " + (s / "study.yaml").string());
  INFO(c.out);
  CHECK(c.code == 0);
  CHECK_THAT(c.out, Catch::Contains("# range mode: round 1 simulates pilot budgets [5, 17, 55, 181, 600]"));
  CHECK_THAT(c.out, Catch::Contains("to 1 core-hours"));

  // A cap below the first round's cost is refused before anything is written.
  std::string tight = range_study;
  tight.replace(tight.find("max_core_hours: 1"), 17, "max_core_hours: 1e-9");
  write(s / "tight.yaml", tight);
  const Result t = run("plan " + (s / "tight.yaml").string() + " --out " + (s / "tight").string());
  INFO(t.out);
  CHECK(t.code == 2);
  CHECK_THAT(t.out, Catch::Contains("precision.max_core_hours"));
  CHECK(!fs::exists(s / "tight"));
}
