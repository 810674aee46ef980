#include "io/memory_messages.hpp"

#include <fmt/format.h>
#include <yaml-cpp/yaml.h>

#include <algorithm>
#include <cstdio>
#include <vector>

#include "io/yaml_input.hpp"

namespace dobudget::io {
namespace {

// The study keys a driver may be written as, the first being its own key. The environment's sizes
// come from environment.file or environment.model when the study gives a model.
std::vector<std::string> keys_of(Driver d) {
  switch (d) {
    case Driver::pilot_budget:
    case Driver::pilot_budget_count: return {"budgets.pilot"};
    case Driver::logged_budget:
    case Driver::logged_budget_count: return {"budgets.logged"};
    case Driver::horizon: return {"environment.horizon"};
    case Driver::states: return {"environment.states", "environment.file", "environment.model"};
    case Driver::actions: return {"environment.actions", "environment.file", "environment.model"};
    case Driver::observations: return {"environment.observations", "environment.file", "environment.model"};
    case Driver::latent_states: return {"fit.latent_states"};
    case Driver::trajectories: return {"evaluation.trajectories"};
    case Driver::belief_points: return {"planner.belief_points"};
    case Driver::rollouts: return {"planner.rollouts"};
    case Driver::strategy_count: return {"strategies"};
    case Driver::scenarios: return {"sweep"};
    case Driver::draws: return {"environment.draws"};
    case Driver::replicates: return {"replicates"};
  }
  return {"?"};
}

// "(10000000 episodes)", "(100 budgets)", "(5000)".
std::string value_text(Driver d, double v, const std::string& key) {
  const std::string n = fmt::format("{}", v);
  switch (d) {
    case Driver::pilot_budget:
    case Driver::logged_budget: return n + " episodes, the largest budget";
    case Driver::pilot_budget_count:
    case Driver::logged_budget_count: return n + " budgets";
    case Driver::strategy_count: return n + " strategies";
    case Driver::scenarios: return n + " scenarios";
    case Driver::states: return key == "environment.states" ? n : n + " states";
    case Driver::actions: return key == "environment.actions" ? n : n + " actions";
    case Driver::observations: return key == "environment.observations" ? n : n + " observations";
    default: return n;
  }
}

// The node at a dotted key path ("budgets.pilot") of a study, undefined when it is not written.
YAML::Node at_path(const YAML::Node& root, const std::string& path) {
  YAML::Node node;
  node.reset(root);  // reset rebinds; assigning a Node would overwrite the tree's contents
  for (std::size_t from = 0;;) {
    if (!node.IsDefined() || !node.IsMap()) return YAML::Node(YAML::NodeType::Undefined);
    const std::size_t dot = path.find('.', from);
    const std::string name = path.substr(from, dot == std::string::npos ? std::string::npos : dot - from);
    YAML::Node child(YAML::NodeType::Undefined);
    for (const auto& entry : node)
      if (entry.first.IsScalar() && entry.first.Scalar() == name) child.reset(entry.second);
    if (dot == std::string::npos || !child.IsDefined()) return child;
    node.reset(child);
    from = dot + 1;
  }
}

struct Place {
  std::string key;
  int line = 0;
};

// Where `path` is written: in place, or as a sweep entry ("sweep.<path>").
std::optional<Place> written(const YAML::Node& root, const std::string& path) {
  if (const YAML::Node v = at_path(root, path); v.IsDefined()) return Place{path, std::max(1, input::line_of(v))};
  if (path == "sweep") return std::nullopt;
  const YAML::Node sweep = at_path(root, "sweep");
  if (sweep.IsDefined() && sweep.IsMap())
    for (const auto& entry : sweep)
      if (entry.first.IsScalar() && entry.first.Scalar() == path)
        return Place{"sweep." + path, std::max(1, input::line_of(entry.second))};
  return std::nullopt;
}

}  // namespace

std::string memory_part_name(MemoryPartId part) {
  switch (part) {
    case MemoryPartId::datasets: return "datasets";
    case MemoryPartId::evaluation_histories: return "evaluation histories";
    case MemoryPartId::model_fit: return "model fit";
    case MemoryPartId::fitted_models_kept: return "fitted models kept";
    case MemoryPartId::planner_fitted: return "planner (fitted model)";
    case MemoryPartId::planner_true: return "planner (true model)";
    case MemoryPartId::results: return "results kept until the tables are written";
  }
  return "?";
}

std::string format_bytes(double b) {
  const char* unit[] = {"bytes", "kB", "MB", "GB", "TB", "PB", "EB"};
  int k = 0;
  while (b >= 1000.0 && k < 6) {
    b /= 1000.0;
    ++k;
  }
  char buf[64];
  std::snprintf(buf, sizeof buf, k == 0 ? "%.0f %s" : "%.3g %s", b, unit[k]);
  return buf;
}

std::optional<InputError> memory_refusal(const MemoryEstimate& m, const MachineMemory& available,
                                         const std::string& study_file, const std::string& yaml_text) {
  if (available.bytes <= 0.0 || m.peak_bytes <= available.bytes) return std::nullopt;
  const MemoryPart big = m.largest();
  YAML::Node root;
  try {
    root = input::parse_yaml(yaml_text, study_file);
  } catch (const InputError&) {
    // The study was read before; if it changed since, the refusal is still given, at line 1.
  }
  std::vector<DriverValue> drivers = big.drivers;
  std::stable_sort(drivers.begin(), drivers.end(), [](const DriverValue& a, const DriverValue& b) { return a.value > b.value; });

  std::optional<Place> at;
  std::vector<std::string> listed;
  for (const DriverValue& d : drivers) {
    std::string key = keys_of(d.driver).front();
    for (const std::string& k : keys_of(d.driver))
      if (const auto w = written(root, k)) {
        key = k;
        if (!at) at = w;
        break;
      }
    listed.push_back(fmt::format("{} ({})", key, value_text(d.driver, d.value, key)));
  }
  if (!at) {  // only defaults drive it: the largest driver, at its section or the top of the file
    const std::string key = drivers.empty() ? std::string() : keys_of(drivers.front().driver).front();
    const auto section = written(root, key.substr(0, key.find('.')));
    at = Place{key, section ? section->line : 1};
  }
  const std::string message = fmt::format(
      "the estimated peak memory, {} ({} unit(s) at once), is more than the {} this process may use ({}); the "
      "largest part is {}, {}, driven by {}: lower them (or use fewer threads; `dobudget check` shows every part)",
      format_bytes(m.peak_bytes), m.concurrent_units, format_bytes(available.bytes), available.limited_by,
      memory_part_name(big.id), format_bytes(big.bytes), input::join(listed));
  return InputError(study_file, at->line, at->key, message);
}

void refuse_memory_beyond(const MemoryEstimate& estimate, const MachineMemory& available,
                          const std::string& study_file) {
  if (available.bytes <= 0.0 || estimate.peak_bytes <= available.bytes) return;
  if (auto refusal = memory_refusal(estimate, available, study_file, input::read_file_text(study_file, "study file")))
    throw *refusal;
}

}  // namespace dobudget::io
