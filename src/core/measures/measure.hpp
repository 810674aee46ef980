// Measures of quality (docs/design.md, "Measures").
#pragma once
#include <array>
#include <optional>
#include <string_view>

namespace dobudget {

enum class Measure { model_kl, return_gap };

inline constexpr std::array<Measure, 2> all_measures{Measure::model_kl, Measure::return_gap};

constexpr std::string_view name(Measure m) {
  switch (m) {
    case Measure::model_kl: return "model_kl";
    case Measure::return_gap: return "return_gap";
  }
  return "?";
}

inline std::optional<Measure> parse_measure(std::string_view s) {
  for (Measure k : all_measures)
    if (name(k) == s) return k;
  return std::nullopt;
}

}  // namespace dobudget
