// Random streams: one per (study seed, scenario, environment draw, replicate, purpose), where every
// scenario of a study uses scenario component 0 (paired scenarios: unit_stream_key below).
// design.md sec. 6. Every stream is a Boost.Random engine (output specified by the algorithm,
// hence identical on every platform); std:: distributions are never used.
#pragma once
#include <boost/random/mersenne_twister.hpp>
#include <cstdint>
#include <string_view>

namespace dobudget {

// What a stream is for. The numeric values are part of the seeding contract: never renumber.
enum class Purpose : std::uint64_t {
  environment = 1,  // synthetic environment draw (replicate index ignored, see environment_seed)
  logged = 2,       // logged (confounded) episodes
  pilot = 3,        // pilot (interventional) episodes
  evaluation = 4,   // histories for model_kl, shared by every strategy and budget of a replicate
  fit = 5,          // EM initialisations (sub-keyed by strategy and budgets)
  planner = 6,      // belief points for point-based value iteration
  rollout = 7,      // rollouts for return_gap, shared by every strategy and budget of a replicate
  bootstrap = 8,    // percentile bootstrap of the answer
  records = 9,      // episodes written by `dobudget simulate` (sub 0: logged, 1: pilot; episode_records.hpp)
  records_fit = 10, // fits of the team's records (model_selection.hpp): starts and episode folds
};

using Engine = boost::random::mt19937_64;

// SplitMix64 finaliser (Steele, Lea and Flood, "Fast splittable pseudorandom number
// generators", OOPSLA 2014): a fixed bijective integer hash.
constexpr std::uint64_t mix64(std::uint64_t x) {
  x += 0x9e3779b97f4a7c15ULL;
  x = (x ^ (x >> 30)) * 0xbf58476d1ce4e5b9ULL;
  x = (x ^ (x >> 27)) * 0x94d049bb133111ebULL;
  return x ^ (x >> 31);
}

// Folds a sequence of keys into one seed: h <- mix64(h ^ mix64(key)).
constexpr std::uint64_t combine(std::uint64_t h, std::uint64_t key) { return mix64(h ^ mix64(key)); }

// FNV-1a of a string, for keys that are names (fixed, not std::hash).
constexpr std::uint64_t name_key(std::string_view s) {
  std::uint64_t h = 0xcbf29ce484222325ULL;
  for (unsigned char c : s) h = (h ^ c) * 0x100000001b3ULL;
  return h;
}

struct StreamKey {
  std::uint64_t study_seed = 1;
  std::uint64_t scenario = 0;
  std::uint64_t draw = 0;
  std::uint64_t replicate = 0;
};

constexpr std::uint64_t stream_seed(const StreamKey& k, Purpose p, std::uint64_t sub = 0) {
  std::uint64_t h = mix64(k.study_seed);
  h = combine(h, k.scenario);
  h = combine(h, k.draw);
  h = combine(h, k.replicate);
  h = combine(h, static_cast<std::uint64_t>(p));
  return combine(h, sub);
}

inline Engine make_engine(const StreamKey& k, Purpose p, std::uint64_t sub = 0) {
  return Engine(stream_seed(k, p, sub));
}

// Paired scenarios: the stream key of (scenario, draw, replicate) has scenario component 0 for
// every scenario of a study, so the scenarios of a sweep share every random stream (common random
// numbers; DEVELOPERS.md, "Sweeps"). What a sweep then shares:
//   * a swept key that does not enter a stream's computation leaves that stream's output identical:
//     sweeping the loggers (logging.*) keeps worlds, pilot data, evaluation histories, planner
//     points, rollouts and every pilot-only fit identical, so pilot-only rows are the same in
//     every scenario and only the logged data (same uniforms, another decision rule) differ;
//   * a key that changes the world's draw (environment sizes, dynamics_concentration,
//     observation_noise) draws it from the same stream, so the worlds are coupled but not the
//     same: observation_noise only rescales the same Dirichlet noise (initial distribution,
//     dynamics and rewards stay the same); sizes and dynamics_concentration change how many
//     numbers are consumed, and what follows differs. horizon and discount do not enter the draw:
//     the worlds are the same, the episodes (of another length) are not;
//   * environment.draws and replicates: scenario k's draws and replicates are the first ones of a
//     scenario with more.
// A study without a sweep has one scenario, index 0: its streams are those of earlier versions.
// `scenario` is taken, and ignored, so that every call site says which unit it keys.
constexpr StreamKey unit_stream_key(std::uint64_t study_seed, int /*scenario*/, int draw, int replicate) {
  return StreamKey{study_seed, 0, static_cast<std::uint64_t>(draw), static_cast<std::uint64_t>(replicate)};
}

}  // namespace dobudget
