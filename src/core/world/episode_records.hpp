// Episodes of one world of a study, for export (`dobudget simulate`): the records a team would
// hold if its process were that world. World number `draw` of the scenario is made exactly as
// `plan` makes it (make_environment, synthetic.hpp: the study seed, stream key (draw, replicate
// 0)); the episodes come from their own streams, Purpose::records, keyed by `episode_seed` (the
// study seed unless the user gives another) and the draw: sub-stream 0 for the logged episodes
// (the world's privileged logger acting on the hidden state), 1 for the pilot ones (the pilot
// policy: uniform over actions). They share no stream with `plan`, so exporting does not repeat a
// unit's data, and the logged and pilot episodes do not depend on each other's number.
#pragma once
#include <cstdint>

#include "core/running/settings.hpp"
#include "core/world/dataset.hpp"

namespace dobudget {

struct EpisodeRecordsOfWorld {
  Environment world;
  Dataset logged, pilot;  // every episode has the world's horizon
};

// std::invalid_argument when draw is not one of the scenario's draws or a count is negative.
EpisodeRecordsOfWorld simulate_records(const ScenarioSettings& s, std::uint64_t study_seed, int draw,
                                       std::uint64_t episode_seed, int logged, int pilot);

}  // namespace dobudget
