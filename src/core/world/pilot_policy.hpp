// Pilot policies: how the pilot regime chooses actions (issue 13). A pilot policy sees only the
// recorded history of the episode under way: the observations o_0..o_t and its own past actions
// a_0..a_{t-1}. It never sees the hidden state. That is what keeps pilot data interventional: the
// action depends on the record alone, so conditioning on the record (as every fit does) leaves
// the actions as inputs (sequential ignorability; Robins, "A new approach to causal inference in
// mortality studies with a sustained exposure period", Math. Modelling 7, 1986, and Pearl,
// "Causality", 2nd ed., 2009, sec. 4.4 on plans whose actions depend on observed history only).
//
// The separation is in the types: PilotPolicy::probabilities takes a RecordedHistory, which holds
// only observations and actions and cannot be built from a state or an Environment; the
// simulator (simulate_pilot, dataset.hpp) knows the state and calls the policy with the record.
// Policies are built from logged Datasets, which hold no states either.
// tests/core/world/test_pilot_policy.cpp checks this at compile time (static_assert on concepts).
//
// The rules (A actions; x the most recent recorded observation o_t; n(x, a) the number of logged
// steps in which action a followed recorded observation x, over the logged episodes the policy is
// built from; phi = pilot.floor, e = pilot.explore):
//   uniform:         p(a) = 1/A.
//   usual-practice:  p(a | x) = (1 - e) n(x, a) / n(x) + e / A, with n(x) = sum_a n(x, a);
//                    uniform where n(x) = 0.
//   complement:      p(a | x) = phi / A + (1 - phi) w(x, a) / sum_b w(x, b),  w(x, a) = 1 / (1 + n(x, a)):
//                    the actions the loggers took least often after x are favoured, and every
//                    action keeps at least phi / A (uniform where n(x) = 0).
//   targeted:        p(a | history) = phi / A + (1 - phi) [a = a*], a* the action of largest
//                    uncertainty (core/running/pilot_design.hpp), ties shared equally.
#pragma once
#include <cstdint>
#include <optional>
#include <span>
#include <string_view>
#include <vector>

namespace dobudget {

enum class PilotPolicyKind { uniform, usual_practice, complement, targeted };

inline constexpr PilotPolicyKind all_pilot_policies[] = {PilotPolicyKind::uniform, PilotPolicyKind::usual_practice,
                                                         PilotPolicyKind::complement, PilotPolicyKind::targeted};

constexpr std::string_view name(PilotPolicyKind p) {
  switch (p) {
    case PilotPolicyKind::uniform: return "uniform";
    case PilotPolicyKind::usual_practice: return "usual-practice";
    case PilotPolicyKind::complement: return "complement";
    case PilotPolicyKind::targeted: return "targeted";
  }
  return "?";
}

inline std::optional<PilotPolicyKind> parse_pilot_policy(std::string_view s) {
  for (PilotPolicyKind p : all_pilot_policies)
    if (name(p) == s) return p;
  return std::nullopt;
}

// What a pilot policy may read: the record of the episode under way, o_0..o_t and a_0..a_{t-1}
// (observations().size() == actions().size() + 1). Only constructible from those two sequences.
class RecordedHistory {
 public:
  RecordedHistory(std::span<const std::int32_t> observations, std::span<const std::int32_t> actions)
      : observations_(observations), actions_(actions) {}
  RecordedHistory(int, std::span<double>) = delete;  // no state (an index) can stand in for a record

  std::span<const std::int32_t> observations() const { return observations_; }
  std::span<const std::int32_t> actions() const { return actions_; }
  int step() const { return static_cast<int>(actions_.size()); }
  std::int32_t last_observation() const { return observations_.back(); }

 private:
  std::span<const std::int32_t> observations_;
  std::span<const std::int32_t> actions_;
};

// A pilot policy. Episodes are run one after another; an adaptive policy may learn from each
// finished episode's record (episode_done), so the first n episodes never depend on later ones
// and nested budgets stay prefixes.
class PilotPolicy {
 public:
  virtual ~PilotPolicy() = default;
  // True for the uniform policy: the simulator then draws actions exactly as it always has.
  virtual bool uniform() const { return false; }
  // p(a | record) for every action, written to out (size A), summing to 1.
  virtual void probabilities(const RecordedHistory& history, std::span<double> out) = 0;
  // The record of a finished episode (o_0..o_H, a_0..a_{H-1}).
  virtual void episode_done(const RecordedHistory& /*history*/) {}
};

// n(x, a): logged steps with action a after recorded observation x (O x A, row-major), from the
// first `count` episodes of observations/actions laid out as in Dataset (stride H + 1 and H;
// lengths empty or one per episode).
struct ActionCounts {
  int observations = 0;
  int actions = 0;
  std::vector<double> n;  // O x A
  double at(int x, int a) const { return n[static_cast<std::size_t>(x) * actions + a]; }
};

struct Dataset;  // dataset.hpp

// The counts of the first `count` episodes of `logged` (every episode's recorded steps t < length).
ActionCounts action_counts(const Dataset& logged, int count, int observations, int actions);

class UniformPilot final : public PilotPolicy {
 public:
  explicit UniformPilot(int actions) : actions_(actions) {}
  bool uniform() const override { return true; }
  void probabilities(const RecordedHistory&, std::span<double> out) override;

 private:
  int actions_;
};

class UsualPracticePilot final : public PilotPolicy {
 public:
  UsualPracticePilot(ActionCounts counts, double explore);
  void probabilities(const RecordedHistory& history, std::span<double> out) override;

 private:
  ActionCounts counts_;
  double explore_;
};

class ComplementPilot final : public PilotPolicy {
 public:
  ComplementPilot(ActionCounts counts, double floor);
  void probabilities(const RecordedHistory& history, std::span<double> out) override;
  // The least probability any action has after any observation: floor / A (see the rules above).
  double least_probability() const { return floor_ / counts_.actions; }

 private:
  ActionCounts counts_;
  double floor_;
};

}  // namespace dobudget
