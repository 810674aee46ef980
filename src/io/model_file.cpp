#include "io/model_file.hpp"

#include <fmt/format.h>

#include <cmath>
#include <stdexcept>
#include <string_view>
#include <utility>
#include <vector>

#include "io/yaml_input.hpp"

namespace dobudget::io {
namespace {

using input::Entry;
using input::Located;
using input::Reader;

constexpr double row_tolerance = 1e-9;  // docs/model-file.md

const std::vector<std::string> model_keys{"states",      "actions",   "observations", "initial",
                                          "transitions", "emissions", "rewards",      "logging_policy"};
const std::vector<std::pair<std::string, std::string>> model_hints{
    {"horizon", "is not part of a model file: the horizon stays in the study (environment.horizon)"},
    {"discount", "is not part of a model file: the discount stays in the study (environment.discount)"},
    {"draws", "is not part of a model file: a model file is one environment (draws is 1)"},
};

std::string counted(std::size_t n, std::string_view one, std::string_view many) {
  return fmt::format("{} {}", n, n == 1 ? one : many);
}

class ModelReader {
 public:
  explicit ModelReader(const Reader& in) : in_(in) {}

  // A list of exactly n elements; "has 3 rows, expected 4 (states)" otherwise.
  std::vector<Located> sized(const Located& list, int n, std::string_view one, std::string_view many,
                             std::string_view size_name) const {
    std::vector<Located> items = in_.items(list);
    if (static_cast<int>(items.size()) != n)
      in_.fail(list, fmt::format("has {}, expected {} ({})", counted(items.size(), one, many), n, size_name));
    return items;
  }

  // n numbers; when `probability`, non-negative and summing to 1 within the tolerance.
  Vector row(const Located& list, int n, std::string_view size_name, bool probability) const {
    const std::vector<Located> items = sized(list, n, "entry", "entries", size_name);
    Vector v(n);
    for (int i = 0; i < n; ++i) {
      v(i) = in_.number(items[i]);
      if (probability && v(i) < 0.0)
        in_.fail(items[i], fmt::format("must be a probability (non-negative), got {}", v(i)));
    }
    if (probability) {
      const double sum = v.sum();
      if (std::abs(sum - 1.0) > row_tolerance)
        in_.fail(list, fmt::format("entries sum to {:.12g}, not 1 (within {})", sum, row_tolerance));
    }
    return v;
  }

  // A declared size: a whole number in [1, max_model_size].
  int size(const Located& v) const {
    const int n = in_.whole_int(v, 1);
    if (n > max_model_size)
      in_.fail(v, fmt::format("must be at most {} (the largest size the computation holds), got {}", max_model_size, n));
    return n;
  }

  // Rewards: n finite numbers with |r| <= max_abs_reward.
  Vector rewards(const Located& list, int n) const {
    const std::vector<Located> items = sized(list, n, "entry", "entries", "observations");
    Vector v(n);
    for (int i = 0; i < n; ++i) {
      v(i) = in_.number(items[i]);
      if (!(std::abs(v(i)) <= max_abs_reward))
        in_.fail(items[i], fmt::format("must be at most {:g} in absolute value (so that sums of rewards over the "
                                       "horizon stay finite), got {}",
                                       max_abs_reward, v(i)));
    }
    return v;
  }

  // rows x cols numbers, one list per row.
  Matrix matrix(const Located& list, int rows, int cols, std::string_view rows_name, std::string_view cols_name,
                bool probability) const {
    const std::vector<Located> items = sized(list, rows, "row", "rows", rows_name);
    Matrix m(rows, cols);
    for (int r = 0; r < rows; ++r) m.row(r) = row(items[r], cols, cols_name, probability).transpose();
    return m;
  }

 private:
  const Reader& in_;
};

template <class Row>
void emit_row(YAML::Emitter& out, const Row& row) {
  out << YAML::Flow << YAML::BeginSeq;
  for (Eigen::Index i = 0; i < row.size(); ++i) out << fmt::format("{}", row(i));
  out << YAML::EndSeq;
}

void emit_matrix(YAML::Emitter& out, const Matrix& m) {
  out << YAML::BeginSeq;
  for (Eigen::Index r = 0; r < m.rows(); ++r) emit_row(out, m.row(r));
  out << YAML::EndSeq;
}

void check_horizon_and_discount(int horizon, double discount) {
  if (horizon < 1) throw std::invalid_argument(fmt::format("load_model: horizon must be at least 1, got {}", horizon));
  if (!(discount > 0.0 && discount <= 1.0))
    throw std::invalid_argument(fmt::format("load_model: discount must be in (0, 1], got {}", discount));
}

}  // namespace

Environment parse_model(const YAML::Node& node, const std::string& file, const std::string& key_prefix, int horizon,
                        double discount) {
  check_horizon_and_discount(horizon, discount);
  const Reader in(file);
  const ModelReader read(in);
  const Located root{node, key_prefix, input::line_of(node)};
  if (!node.IsMap())
    in.fail(root, "expected a model: a mapping with states, actions, observations, initial, transitions, emissions, "
                  "rewards and optionally logging_policy; got " +
                      input::describe(node));
  const std::vector<Entry> entries = in.entries(root, model_keys, model_hints);
  auto find = [&](std::string_view name) { return input::find_entry(entries, name); };
  auto need = [&](std::string_view name) -> const Located& {
    if (const Located* v = find(name)) return *v;
    in.fail(root.line, input::child_key(key_prefix, name),
            "is missing: a model gives states, actions, observations, initial, transitions, emissions and rewards");
  };

  Environment env;
  Pomdp& m = env.model;
  m.states = read.size(need("states"));
  m.actions = read.size(need("actions"));
  m.observations = read.size(need("observations"));
  m.horizon = horizon;
  m.discount = discount;

  m.initial = read.row(need("initial"), m.states, "states", true);
  const std::vector<Located> per_action = read.sized(need("transitions"), m.actions, "matrix", "matrices", "actions");
  for (const Located& t : per_action) m.transitions.push_back(read.matrix(t, m.states, m.states, "states", "states", true));
  m.emissions = read.matrix(need("emissions"), m.states, m.observations, "states", "observations", true);
  m.rewards = read.rewards(need("rewards"), m.observations);
  if (const Located* p = find("logging_policy"))
    env.logging_policy = read.matrix(*p, m.states, m.actions, "states", "actions", true);

  // The checks above are those of the core, with locations; this one guards against drift.
  const std::string problem = env.logging_policy.size() > 0 ? validate(env, row_tolerance) : validate(m, row_tolerance);
  if (!problem.empty()) in.fail(root, problem);
  return env;
}

Environment load_model(const std::filesystem::path& file, int horizon, double discount) {
  check_horizon_and_discount(horizon, discount);
  const std::string name = file.string();
  const YAML::Node node = input::parse_yaml(input::read_file_text(file, "model file"), name);
  return parse_model(node, name, "", horizon, discount);
}

void emit_model(YAML::Emitter& out, const Environment& env) {
  const Pomdp& m = env.model;
  out << YAML::BeginMap;
  out << YAML::Key << "states" << YAML::Value << m.states;
  out << YAML::Key << "actions" << YAML::Value << m.actions;
  out << YAML::Key << "observations" << YAML::Value << m.observations;
  out << YAML::Key << "initial" << YAML::Value;
  emit_row(out, m.initial);
  out << YAML::Key << "transitions" << YAML::Value << YAML::BeginSeq;
  for (const Matrix& t : m.transitions) emit_matrix(out, t);
  out << YAML::EndSeq;
  out << YAML::Key << "emissions" << YAML::Value;
  emit_matrix(out, m.emissions);
  out << YAML::Key << "rewards" << YAML::Value;
  emit_row(out, m.rewards);
  if (env.logging_policy.size() > 0) {
    out << YAML::Key << "logging_policy" << YAML::Value;
    emit_matrix(out, env.logging_policy);
  }
  out << YAML::EndMap;
}

std::string model_yaml(const Environment& env) {
  YAML::Emitter out;
  emit_model(out, env);
  if (!out.good()) throw std::logic_error("model_yaml: " + out.GetLastError());
  return std::string(out.c_str()) + "\n";
}

}  // namespace dobudget::io
