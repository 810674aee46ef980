// Random streams: one per (study seed, scenario, environment draw, replicate, purpose).
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

}  // namespace dobudget
