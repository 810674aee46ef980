// Studies from the team's records (io/records_study.hpp, the environment.data keys of study_file):
// defaults (draws 16, latent_states auto, prior_concentration 1, the horizon of the longest episode,
// budgets.logged = the logged episodes), refusals named at their key, the study's identity following
// the records' bytes, a resolved study that needs no records until worlds are drawn, and worlds that
// are valid, deterministic and different between draws. (The numbers checked are counts of the
// records written here; the Dirichlet draws themselves are checked against their moments in
// tests/core/world/test_posterior_world.cpp.)
#include <catch2/catch.hpp>

#include <string>

#include <sys/stat.h>

#include "core/world/dataset.hpp"
#include "core/world/posterior_world.hpp"
#include "core/world/synthetic.hpp"
#include "input_error_of.hpp"
#include "io/episode_file.hpp"
#include "io/records_study.hpp"
#include "io/methods_text.hpp"
#include "io/study_file.hpp"
#include "temp_dir.hpp"
#include "../two_state_world.hpp"

using namespace dobudget;
using dobudget::test::error_of;
using dobudget::test::TempDir;

namespace {

Environment world() { return test::two_state_world({5, 0.6, 0.9, 0.8, 0.9, 0.3, true}); }

// 120 logged episodes (every fourth stops after 2 actions) and 15 pilot ones, with a codebook.
void write_records(const TempDir& dir, std::uint64_t seed = 4) {
  const Environment env = world();
  Engine rng(seed);
  io::EpisodeRecords r;
  r.codebook = io::numbered_codebook(env.model);
  r.logged = simulate(env, Regime::logged, 120, rng);
  r.logged.lengths.assign(120, 5);
  for (int i = 0; i < 120; i += 4) r.logged.lengths[static_cast<std::size_t>(i)] = 2;
  r.pilot = simulate(env, Regime::pilot, 15, rng);
  for (int i = 0; i < 120; ++i) r.logged_ids.push_back("l" + std::to_string(i));
  for (int i = 0; i < 15; ++i) r.pilot_ids.push_back("p" + std::to_string(i));
  io::write_episodes(dir.path() / "episodes.csv", r);
  dir.write("codebook.yaml", io::codebook_yaml(r.codebook));
}

const std::string records_study = "name: r\nseed: 5\nenvironment: { data: episodes.csv, codebook: codebook.yaml }\n"
                                  "budgets: { pilot: [10, 40] }\nfit: { restarts: 2 }\n";

}  // namespace

TEST_CASE("records study: defaults come from the records", "[records_study]") {
  TempDir dir;
  write_records(dir);
  const auto file = dir.write("study.yaml", records_study);
  Study st = io::load_study(file);
  const ScenarioSettings& s = st.scenarios.front().settings;
  REQUIRE(s.environment.records);
  const RecordsSettings& r = *s.environment.records;
  CHECK(s.environment.draws == 16);
  CHECK(r.latent_states == 0);
  CHECK(r.concentration == 1.0);
  CHECK(r.logged_episodes == 120);
  CHECK(r.pilot_episodes == 15);
  CHECK(s.environment.horizon == 5);  // the longest episode
  CHECK(s.logged_budgets == std::vector<int>{120});
  CHECK(s.environment.family.actions == 2);
  CHECK(s.environment.family.observations == 3);
  CHECK(r.fit_follows);
  // The fit runs only when asked for: then fit.latent_states follows the chosen size.
  CHECK(!r.posterior);
  io::prepare_records(st);
  const RecordsSettings& fitted = *st.scenarios.front().settings.environment.records;
  REQUIRE(fitted.posterior);
  CHECK(st.scenarios.front().settings.fit.latent_states == fitted.posterior->fitted.states);
  CHECK(fitted.posterior->fitted.rewards(2) == -1.0);  // the codebook's rewards
}

TEST_CASE("records study: worlds are valid, differ between draws and are the same on every reading", "[records_study]") {
  TempDir dir;
  write_records(dir);
  const auto file = dir.write("study.yaml", records_study);
  Study a = io::load_study(file), b = io::load_study(file);
  io::prepare_records(a);
  io::prepare_records(b);
  const ScenarioSettings& s = a.scenarios.front().settings;
  const Environment w0 = make_environment(s, unit_stream_key(a.seed, 0, 0, 0));
  const Environment w1 = make_environment(s, unit_stream_key(a.seed, 0, 1, 0));
  const Environment w0b = make_environment(b.scenarios.front().settings, unit_stream_key(b.seed, 0, 0, 0));
  CHECK(validate(w0).empty());
  CHECK(w0.model.horizon == 5);
  CHECK(w0.logging_policy.rows() == w0.model.states);
  CHECK(w0.model.emissions != w1.model.emissions);  // another plausible world
  CHECK(w0.model.emissions == w0b.model.emissions);  // the same fit, the same draw: bit for bit
  CHECK(w0.logging_policy == w0b.logging_policy);
  CHECK(io::resolved_yaml(a) == io::resolved_yaml(b));
}

TEST_CASE("records study: the resolved study follows the records' bytes and needs them only for worlds", "[records_study]") {
  TempDir dir;
  write_records(dir);
  const auto file = dir.write("study.yaml", records_study);
  Study st = io::load_study(file);
  io::prepare_records(st);
  const std::string resolved = io::resolved_yaml(st);
  // Other records (another draw of the same world, same counts): another study.
  TempDir other;
  write_records(other, 99);
  Study st2 = io::load_study(other.write("study.yaml", records_study));
  io::prepare_records(st2);
  CHECK(io::resolved_yaml(st2) != resolved);
  // The resolved study reads back without the records (answer, report and merge need no fit).
  const auto resolved_file = dir.write("run/study.resolved.yaml", resolved);
  std::filesystem::remove(dir.path() / "episodes.csv");
  Study back = io::load_study(resolved_file);
  CHECK(io::resolved_yaml(back) == resolved);
  CHECK(back.scenarios.front().settings.environment.records->chosen_latent_states ==
        st.scenarios.front().settings.environment.family.states);
  // ... and asks for them, and checks them, when worlds are needed.
  CHECK_THROWS_AS(io::prepare_records(back), io::InputError);
  write_records(dir, 99);  // changed records at the same place
  const io::InputError e = error_of([&] { io::prepare_records(back); });
  CHECK(e.message.find("the records changed") != std::string::npos);
  // A pipe where the records were (a hostile or edited resolved study): refused at once, never read
  // (reading a FIFO with no writer would block forever).
  std::filesystem::remove(dir.path() / "episodes.csv");
  REQUIRE(::mkfifo((dir.path() / "episodes.csv").c_str(), 0600) == 0);
  const io::InputError pipe = error_of([&] { io::prepare_records(back); });
  CHECK(pipe.message.find("not a regular file") != std::string::npos);
}

TEST_CASE("records study: refusals name the key", "[records_study]") {
  TempDir dir;
  write_records(dir);
  const auto bad = [&](const std::string& text) { return error_of([&] { io::load_study(dir.write("bad.yaml", text)); }); };
  CHECK(bad("environment: { data: episodes.csv, states: 3 }\n").key == "environment.states");
  CHECK(bad("environment: { data: episodes.csv, file: m.yaml }\n").key == "environment.file");
  CHECK(bad("environment: { codebook: codebook.yaml }\n").key == "environment.codebook");
  CHECK(bad("environment: { data: episodes.csv, prior_concentration: 0 }\n").key == "environment.prior_concentration");
  CHECK(bad("environment: { data: episodes.csv, latent_states: 0 }\n").key == "environment.latent_states");
  CHECK(bad("environment: { data: missing.csv }\n").key == "environment.data");
  CHECK(bad("environment: { data: episodes.csv }\nmeasures: [return_gap]\ntargets: { return_gap: 0.1 }\n").key == "measures");
  CHECK(bad("environment: { data: episodes.csv }\nsweep: { environment.data: [a.csv] }\n").key.find("sweep") == 0);
  // The worlds carry their loggers: a logging model is refused, written or swept.
  CHECK(bad("environment: { data: episodes.csv }\nlogging: { privilege: 0.5 }\n").key == "logging");
  CHECK(bad("environment: { data: episodes.csv }\nsweep: { logging.privilege: [0, 1] }\n").key.find("logging") != std::string::npos);
  // A bad record is reported in the episodes file, at its line.
  dir.write("broken.csv", "episode,step,observation,action,regime\ne,0,o0,a0,logged\ne,1,o1,a0,logged\n");
  const io::InputError e = bad("environment: { data: broken.csv }\n");
  CHECK(e.file.find("broken.csv") != std::string::npos);
  CHECK(e.line == 3);
  // The concentration can be swept; each scenario keeps it.
  Study st = io::load_study(dir.write("sweep.yaml", records_study + "sweep: { environment.prior_concentration: [0.5, 4] }\n"));
  REQUIRE(st.scenarios.size() == 2);
  CHECK(st.scenarios[1].settings.environment.records->concentration == 4.0);
}

TEST_CASE("records study: the methods paragraph says the worlds come from the records", "[records_study]") {
  // The report's methods text (methods_text.hpp) must describe what was simulated: for a study from
  // records, the records' counts, the fitted latent size, the number of plausible worlds and the
  // prior concentration, not the synthetic family.
  TempDir dir;
  write_records(dir);
  const auto file = dir.write("study.yaml", records_study);
  Study st = io::load_study(file);
  io::prepare_records(st);
  const std::vector<AnswerRow> none;
  const std::vector<std::string> p = io::methods_paragraphs({&st, &none, 1000});
  REQUIRE(!p.empty());
  const int states = st.scenarios.front().settings.environment.family.states;
  CHECK(p[0].find("120 logged and 15 pilot episodes") != std::string::npos);
  CHECK(p[0].find(std::to_string(states) + " latent values") != std::string::npos);
  CHECK(p[0].find("16 plausible worlds") != std::string::npos);
  CHECK(p[0].find("prior concentration of 1") != std::string::npos);
  CHECK(p[0].find("synthetic family") == std::string::npos);
}
