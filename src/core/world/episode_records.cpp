#include "core/world/episode_records.hpp"

#include <stdexcept>
#include <string>

#include "core/world/synthetic.hpp"

namespace dobudget {

EpisodeRecordsOfWorld simulate_records(const ScenarioSettings& s, std::uint64_t study_seed, int draw,
                                       std::uint64_t episode_seed, int logged, int pilot) {
  const int draws = s.environment.given ? 1 : s.environment.draws;
  if (draw < 0 || draw >= draws)
    throw std::invalid_argument("simulate_records: draw " + std::to_string(draw) + " of " + std::to_string(draws));
  if (logged < 0 || pilot < 0) throw std::invalid_argument("simulate_records: negative episode count");
  EpisodeRecordsOfWorld r;
  r.world = make_environment(s, unit_stream_key(study_seed, 0, draw, 0));
  const StreamKey key{episode_seed, 0, static_cast<std::uint64_t>(draw), 0};
  Engine logged_rng = make_engine(key, Purpose::records, 0);
  Engine pilot_rng = make_engine(key, Purpose::records, 1);
  r.logged = simulate(r.world, Regime::logged, logged, logged_rng);
  r.pilot = simulate(r.world, Regime::pilot, pilot, pilot_rng);
  return r;
}

}  // namespace dobudget
