// dobudget fit (issue 9 item 3): the four files, their agreement with each other and with the core
// (the model file loads, its rows are the fit's, selection.csv's BIC is -2 loglik + k ln n by
// Schwarz 1978 with k counted by hand, evidence.csv adds up to the steps of each regime), the
// directory is named by --out or the file name only, and bad options or records exit 2 with
// nothing written.
#include <catch2/catch.hpp>

#include <cmath>
#include <sstream>
#include <string>
#include <vector>

#include "cli_harness.hpp"
#include "core/world/dataset.hpp"
#include "io/episode_file.hpp"
#include "io/model_file.hpp"
#include "../two_state_world.hpp"

using namespace cli_test;
using namespace dobudget;

namespace {

// Two hidden states, two actions, three symbols (numbers chosen here); the logger never takes
// action 1 in state 0.
Environment two_state_world(int horizon) { return test::two_state_world({horizon, 0.7, 0.9, 0.8, 1.0, 0.35, true}); }

// Episodes of the world written as the import format, with its codebook.
void write_records(const std::filesystem::path& dir, int logged, int pilot, int horizon) {
  const Environment env = two_state_world(horizon);
  Engine rng(31);
  io::EpisodeRecords r;
  r.codebook = io::numbered_codebook(env.model);
  r.logged = simulate(env, Regime::logged, logged, rng);
  r.pilot = simulate(env, Regime::pilot, pilot, rng);
  for (int i = 0; i < logged; ++i) r.logged_ids.push_back("L" + std::to_string(i));
  for (int i = 0; i < pilot; ++i) r.pilot_ids.push_back("P" + std::to_string(i));
  io::write_episodes(dir / "episodes.csv", r);
  write(dir / "codebook.yaml", io::codebook_yaml(r.codebook));
}

std::vector<std::vector<std::string>> csv_cells(const std::string& text) {
  std::vector<std::vector<std::string>> rows;
  for (const std::string& line : lines(text)) {
    std::vector<std::string> cells;
    std::stringstream ss(line);
    std::string c;
    while (std::getline(ss, c, ',')) cells.push_back(c);
    if (!line.empty() && line.back() == ',') cells.emplace_back();
    rows.push_back(cells);
  }
  return rows;
}

}  // namespace

TEST_CASE("fit: auto writes model.yaml, selection.csv, evidence.csv and fit.md that agree", "[cli][fit]") {
  Scratch s("fit-auto");
  write_records(s.dir, 600, 2, 6);  // two pilot episodes: some pairs stay open
  const Result r = run("fit '" + (s / "episodes.csv").string() + "' --codebook '" + (s / "codebook.yaml").string() +
                       "' --max-latent-states 4 --folds 3 --out '" + (s / "fit").string() + "'");
  INFO(r.out);
  REQUIRE(r.code == 0);
  // The model file loads as a model (model_file.hpp), with the decision rule as its logger.
  const Environment m = io::load_model(s / "fit" / "model.yaml", 6, 1.0);
  CHECK(m.logging_policy.rows() == m.model.states);
  CHECK(m.model.rewards(0) == 1.0);
  CHECK(m.model.rewards(2) == -1.0);
  // selection.csv: header, one row per size tried, exactly one chosen, whose size is the model's.
  const auto sel = csv_cells(slurp(s / "fit" / "selection.csv"));
  REQUIRE(sel.front() == std::vector<std::string>{"latent_states", "loglik", "parameters", "bic", "heldout_loglik", "chosen"});
  REQUIRE(sel.size() >= 3);
  int chosen = 0;
  // n = observed steps: 602 episodes x 7 observations (every episode runs the whole horizon here).
  const double n = 602.0 * 7;
  for (std::size_t i = 1; i < sel.size(); ++i) {
    const int Z = std::stoi(sel[i][0]);
    CHECK(Z == static_cast<int>(i));  // ascending from 1
    // Parameter count by hand (Schwarz 1978): (Z-1) + 2 Z (Z-1) + 2 Z + Z (one decision row per value).
    CHECK(std::stoll(sel[i][2]) == (Z - 1) + 2 * Z * (Z - 1) + Z * 2 + Z * 1);
    CHECK(std::stod(sel[i][3]) == Approx(-2.0 * std::stod(sel[i][1]) + std::stod(sel[i][2]) * std::log(n)).epsilon(1e-12));
    CHECK(!sel[i][4].empty());
    if (sel[i][5] == "1") {
      ++chosen;
      CHECK(Z == m.model.states);
    }
  }
  CHECK(chosen == 1);
  CHECK(m.model.states == 2);  // the true size (the recovery test in tests/core checks this more widely)
  // evidence.csv: one row per (latent value, action); logged transitions add up to the logged steps
  // (600 x 6) and pilot ones to the pilot steps (2 x 6): sum_z gamma_t(z) = 1 (Rabiner 1989, eq. 27).
  const auto ev = csv_cells(slurp(s / "fit" / "evidence.csv"));
  REQUIRE(ev.front() == std::vector<std::string>{"latent_state", "action", "logged_transitions", "pilot_transitions"});
  REQUIRE(ev.size() == static_cast<std::size_t>(1 + m.model.states * 2));
  double logged = 0.0, pilot = 0.0;
  for (std::size_t i = 1; i < ev.size(); ++i) {
    logged += std::stod(ev[i][2]);
    pilot += std::stod(ev[i][3]);
  }
  CHECK(logged == Approx(3600.0).epsilon(1e-9));
  CHECK(pilot == Approx(12.0).epsilon(1e-9));
  const std::string md = slurp(s / "fit" / "fit.md");
  INFO(md);
  CHECK(md.find("## What the records leave open") != std::string::npos);
  CHECK(md.find("restarts agree") != std::string::npos);
  // The logger never takes a1 in the state that mostly shows o0: the page names that pair as open.
  CHECK(md.find("what a1 does in latent value") != std::string::npos);
}

TEST_CASE("fit: a given size; the default directory is named from the file name only", "[cli][fit]") {
  Scratch s("fit-given");
  write_records(s.dir, 200, 50, 4);
  const Result r = run_command("cd '" + s.dir.string() + "' && '" + std::string(DOBUDGET_BINARY) +
                               "' fit episodes.csv --latent-states 2 --folds 0");
  INFO(r.out);
  REQUIRE(r.code == 0);
  const auto sel = csv_cells(slurp(s / "fits" / "episodes" / "selection.csv"));
  REQUIRE(sel.size() == 2);
  CHECK(sel[1][0] == "2");
  CHECK(sel[1][4].empty());  // no folds: no held-out log-likelihood
  CHECK(sel[1][5] == "1");
  // Without a codebook there are no rewards: the model file has 0 for every observation.
  const Environment m = io::load_model(s / "fits" / "episodes" / "model.yaml", 4, 1.0);
  CHECK(m.model.rewards.cwiseAbs().sum() == 0.0);
}

TEST_CASE("fit: bad options and bad records exit 2 and write nothing", "[cli][fit]") {
  Scratch s("fit-bad");
  write_records(s.dir, 20, 5, 3);
  const std::string csv = "'" + (s / "episodes.csv").string() + "'";
  const std::string out = " --out '" + (s / "out").string() + "'";
  for (const std::string args : {"--latent-states 0", "--latent-states x", "--folds 1", "--folds 0", "--max-latent-states 999",
                                 "--restarts 0"}) {
    INFO(args);
    const Result r = run("fit " + csv + " " + args + out);
    INFO(r.out);
    CHECK(r.code == 2);
    CHECK(!std::filesystem::exists(s / "out"));
  }
  write(s / "bad.csv", "episode,step,observation,action,regime\ne1,0,a,x,logged\ne1,2,b,,logged\n");
  const Result r = run("fit '" + (s / "bad.csv").string() + "'" + out);
  INFO(r.out);
  CHECK(r.code == 2);
  CHECK(r.out.find("bad.csv:3:") != std::string::npos);
  CHECK(!std::filesystem::exists(s / "out"));
}
