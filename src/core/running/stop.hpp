// Stopping a unit part-way (SIGTERM or SIGINT on `dobudget plan`). The core knows nothing of
// signals: the caller hands it a plain predicate ("has a stop been requested?"), which the long
// loops of a unit poll -- between EM evaluations, every few hundred histories of model_kl, between
// planner stages and trajectories, between rollouts -- and a poll that finds it true throws
// Cancelled. A unit that is cancelled delivers nothing (runner.hpp): no partial unit is ever
// recorded. Polling only reads the flag, so results are bit-identical with or without a token.
#pragma once
#include <functional>
#include <stdexcept>
#include <utility>

namespace dobudget {

// Thrown by a poll that finds a stop requested; the unit in progress is abandoned.
struct Cancelled : std::runtime_error {
  Cancelled() : std::runtime_error("cancelled: a stop was requested") {}
};

class StopToken {
 public:
  StopToken() = default;  // never stops
  // `requested` must be safe to call from several threads at once (e.g. it reads a std::atomic).
  explicit StopToken(std::function<bool()> requested) : requested_(std::move(requested)) {}

  bool requested() const { return requested_ && requested_(); }
  void poll() const {
    if (requested()) throw Cancelled();
  }

 private:
  std::function<bool()> requested_;
};

}  // namespace dobudget
