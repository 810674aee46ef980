// The three ways to use the data (docs/design.md, "Strategies").
#pragma once
#include <array>
#include <optional>
#include <string_view>

namespace dobudget {

enum class Strategy { pilot_only, pooled, regime_aware };

inline constexpr std::array<Strategy, 3> all_strategies{Strategy::pilot_only, Strategy::pooled, Strategy::regime_aware};

constexpr std::string_view name(Strategy s) {
  switch (s) {
    case Strategy::pilot_only: return "pilot-only";
    case Strategy::pooled: return "pooled";
    case Strategy::regime_aware: return "regime-aware";
  }
  return "?";
}

inline std::optional<Strategy> parse_strategy(std::string_view s) {
  for (Strategy k : all_strategies)
    if (name(k) == s) return k;
  return std::nullopt;
}

}  // namespace dobudget
