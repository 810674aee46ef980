#include "io/expected_rows.hpp"

#include <fmt/format.h>

#include <map>
#include <optional>
#include <tuple>

#include "io/input_error.hpp"

namespace dobudget::io {
namespace {

// The six key cells of a row.
struct Key {
  int scenario, environment, replicate;
  Strategy strategy;
  int logged, pilot;
  auto operator<=>(const Key&) const = default;
};

Key key_of(const RunRecord& r) { return {r.scenario, r.environment, r.replicate, r.strategy, r.logged, r.pilot}; }

std::string describe(const Key& k) {
  return fmt::format("scenario {}, environment {}, replicate {}, {}, logged {}, pilot {}", k.scenario, k.environment,
                     k.replicate, name(k.strategy), k.logged, k.pilot);
}

// The keys of unit u's rows, in order.
std::vector<Key> unit_keys(const Study& study, const UnitId& u) {
  const ScenarioSettings& s = study.scenarios[static_cast<std::size_t>(u.scenario)].settings;
  std::vector<Key> keys;
  keys.reserve(rows_per_unit(s));
  for (Strategy st : s.strategies)
    for (int L : s.logged_budgets)
      for (int n : s.pilot_budgets) keys.push_back({u.scenario, u.draw, u.replicate, st, L, n});
  return keys;
}

struct Problem {
  const char* column;  // "" when no single column is at fault
  std::string message;
};

// The first key cell in which `got` differs from `want`.
Problem key_problem(const Key& want, const Key& got) {
  const auto differ = [](const char* column, const auto& w, const auto& g) {
    return Problem{column, fmt::format("expected {}, got {}", w, g)};
  };
  if (got.scenario != want.scenario) return differ("scenario", want.scenario, got.scenario);
  if (got.environment != want.environment) return differ("environment", want.environment, got.environment);
  if (got.replicate != want.replicate) return differ("replicate", want.replicate, got.replicate);
  if (got.strategy != want.strategy) return differ("strategy", name(want.strategy), name(got.strategy));
  if (got.logged != want.logged) return differ("logged", want.logged, got.logged);
  return differ("pilot", want.pilot, got.pilot);
}

// Measures present exactly when measured (return_gap may be empty with a note saying why).
std::optional<Problem> measure_problem(const ScenarioSettings& s, const RunRecord& r) {
  bool kl = false, gap = false;
  for (Measure m : s.measures) (m == Measure::model_kl ? kl : gap) = true;
  if (kl && !r.model_kl) return Problem{"model_kl", "is empty, but the scenario measures model_kl"};
  if (!kl && r.model_kl) return Problem{"model_kl", "holds a value, but the scenario does not measure model_kl"};
  if (gap && !r.return_gap && r.note.empty())
    return Problem{"return_gap", "is empty without a note saying why, but the scenario measures return_gap"};
  if (!gap && r.return_gap) return Problem{"return_gap", "holds a value, but the scenario does not measure return_gap"};
  return std::nullopt;
}

}  // namespace

std::size_t rows_per_unit(const ScenarioSettings& s) {
  return s.strategies.size() * s.logged_budgets.size() * s.pilot_budgets.size();
}

std::string unit_rows_problem(const Study& study, const std::vector<UnitId>& units, std::size_t index,
                              const std::vector<RunRecord>& rows) {
  if (index >= units.size())
    return fmt::format("the study has units 0 to {} only", units.size() - 1);
  const UnitId& u = units[index];
  const std::vector<Key> keys = unit_keys(study, u);
  const ScenarioSettings& s = study.scenarios[static_cast<std::size_t>(u.scenario)].settings;
  if (rows.size() != keys.size())
    return fmt::format("it has {} rows, the unit (scenario {}, environment draw {}, replicate {}) has {}", rows.size(),
                       u.scenario, u.draw, u.replicate, keys.size());
  for (std::size_t i = 0; i < rows.size(); ++i) {
    if (key_of(rows[i]) != keys[i]) {
      const Problem p = key_problem(keys[i], key_of(rows[i]));
      return fmt::format("row {} should be ({}), but its {} is wrong: {}", i + 1, describe(keys[i]), p.column, p.message);
    }
    if (const auto p = measure_problem(s, rows[i])) return fmt::format("row {}: {} {}", i + 1, p->column, p->message);
  }
  return {};
}

void check_rows_against_study(const Study& study, const std::vector<RunRecord>& rows, const std::string& source) {
  const std::vector<UnitId> units = enumerate_units(study);
  std::size_t expected = 0;
  for (const UnitId& u : units) expected += rows_per_unit(study.scenarios[static_cast<std::size_t>(u.scenario)].settings);
  const auto line_of = [](std::size_t row) { return static_cast<int>(row + 2); };

  std::map<Key, std::size_t> seen;  // key -> row, to name a repeated row
  std::size_t i = 0;
  for (const UnitId& u : units) {
    const ScenarioSettings& s = study.scenarios[static_cast<std::size_t>(u.scenario)].settings;
    for (const Key& want : unit_keys(study, u)) {
      if (i == rows.size())
        throw InputError(source, line_of(i), "",
                         fmt::format("missing row ({}): the file ends after {} of the study's {} rows; it was cut "
                                     "short or is not this study's runs.csv",
                                     describe(want), rows.size(), expected));
      const Key got = key_of(rows[i]);
      if (got != want) {
        const Problem p = key_problem(want, got);
        std::string why;
        if (const auto it = seen.find(got); it != seen.end())
          why = fmt::format("; this row repeats line {}", line_of(it->second));
        else if (got.scenario >= static_cast<int>(study.scenarios.size()))
          why = fmt::format("; the study has scenarios 0 to {}", study.scenarios.size() - 1);
        throw InputError(source, line_of(i), p.column,
                         fmt::format("{} (the study's row {} is ({})){}; rows must be the study's, each once, in its "
                                     "order",
                                     p.message, i + 1, describe(want), why));
      }
      if (const auto p = measure_problem(s, rows[i])) throw InputError(source, line_of(i), p->column, p->message);
      seen.emplace(got, i);
      ++i;
    }
  }
  if (i < rows.size())
    throw InputError(source, line_of(i), "",
                     fmt::format("a row beyond the study's {} rows ({}); the file holds {} rows", expected,
                                 describe(key_of(rows[i])), rows.size()));
}

}  // namespace dobudget::io
