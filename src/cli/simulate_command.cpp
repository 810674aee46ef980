// dobudget simulate: write episodes of one world of a study in the episodes-file format
// (io/episode_file.hpp), and its codebook when asked.
#include <fmt/format.h>

#include <cstdio>
#include <filesystem>

#include "cli/commands.hpp"
#include "cli/option_values.hpp"
#include "core/world/episode_records.hpp"
#include "io/atomic_file.hpp"
#include "io/episode_file.hpp"
#include "io/records_study.hpp"
#include "io/study_file.hpp"
#include "io/text_escape.hpp"

namespace dobudget::cli {

int simulate_command(const SimulateArgs& args) {
  constexpr long long max_episodes = 10000000;
  const auto logged = static_cast<int>(whole_option("--logged", args.logged, 0, max_episodes));
  const auto pilot = args.pilot.empty() ? 0 : static_cast<int>(whole_option("--pilot", args.pilot, 0, max_episodes));
  if (logged + pilot == 0) throw BadInput("--logged, --pilot: no episodes asked for; give --logged N or --pilot M above 0");
  if (!args.codebook_out.empty() &&
      std::filesystem::weakly_canonical(args.codebook_out) == std::filesystem::weakly_canonical(args.out))
    throw BadInput("--codebook-out: names the same file as --out");
  Study study = io::load_study(args.study);
  io::prepare_records(study);  // a study from records: its worlds are plausible worlds (records_study.hpp)
  const ScenarioSettings& s = study.scenarios.front().settings;
  const int draws = s.environment.given ? 1 : s.environment.draws;
  const auto draw = args.draw.empty() ? 0 : static_cast<int>(whole_option("--draw", args.draw, 0, draws - 1));
  const std::uint64_t seed = args.seed.empty() ? study.seed : unsigned_option("--seed", args.seed);
  const long long rows = static_cast<long long>(logged + pilot) * (s.environment.horizon + 1);
  if (rows > io::max_written_rows)
    throw BadInput(fmt::format("--logged, --pilot: {} episodes of {} rows (environment.horizon {} + 1) are {} rows, "
                               "more than the {} dobudget writes",
                               logged + pilot, s.environment.horizon + 1, s.environment.horizon, rows,
                               io::max_written_rows));

  EpisodeRecordsOfWorld sim = simulate_records(s, study.seed, draw, seed, logged, pilot);
  const io::EpisodeRecords records = io::numbered_records(sim.world.model, std::move(sim.logged), std::move(sim.pilot));
  // The codebook first: a failure then leaves no episodes file without its codebook.
  if (!args.codebook_out.empty()) io::write_file_atomically(args.codebook_out, io::codebook_yaml(records.codebook));
  io::write_episodes(args.out, records);
  std::printf("%s: %d logged and %d pilot episodes of %d actions (%lld rows) of world %d of study %s%s\n",
              io::printable_line(args.out).c_str(), logged, pilot, s.environment.horizon, rows, draw,
              io::printable_line(args.study).c_str(), study.scenarios.size() > 1 ? " (scenario 0 of its sweep)" : "");
  if (!args.codebook_out.empty())
    std::printf("%s: codebook (%d observation codes with their rewards, %d action codes)\n",
                io::printable_line(args.codebook_out).c_str(), sim.world.model.observations, sim.world.model.actions);
  return 0;
}

}  // namespace dobudget::cli
