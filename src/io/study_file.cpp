#include "io/study_file.hpp"

#include <fmt/format.h>
#include <yaml-cpp/yaml.h>

#include <algorithm>
#include <map>
#include <optional>
#include <set>
#include <stdexcept>
#include <string_view>
#include <utility>
#include <vector>

#include "core/answer/precision_search.hpp"
#include "io/model_file.hpp"
#include "core/fitting/model_selection.hpp"
#include "io/records_study.hpp"
#include "io/study_keys.hpp"
#include "io/text_escape.hpp"
#include "io/yaml_input.hpp"

namespace dobudget::io {
namespace {

namespace fs = std::filesystem;
using input::Entry;
using input::Located;
using input::Reader;

// ---- Schema -------------------------------------------------------------------------------------

// The keys of each mapping and the sweepable keys come from the key table (study_keys.hpp).
const std::vector<std::string> top_keys = study_section_keys("");
const std::vector<std::string> environment_keys = study_section_keys("environment");
// The keys only a study from records (environment.data) takes, and the facts the resolved study
// writes of them (environment.records: records_study.hpp).
const std::vector<std::string> records_only_keys{"codebook", "latent_states", "prior_concentration", "records"};
const std::vector<std::string> records_fact_keys{"digest",            "logged_episodes", "pilot_episodes",
                                                 "longest_episode",   "observation_codes", "action_codes",
                                                 "rewards",           "chosen_latent_states"};
// The environment keys of the synthetic family, refused together with a given model.
const std::vector<std::string> family_keys{"states", "actions", "observations", "dynamics_concentration",
                                           "observation_noise"};
const std::vector<std::string> logging_keys = study_section_keys("logging");
const std::vector<std::string> pilot_keys = study_section_keys("pilot");
const std::vector<std::string> budget_keys = study_section_keys("budgets");
// The two keys of the range form of budgets.pilot (a mapping inside a key: not a row of the table).
const std::vector<std::string> pilot_range_keys{"from", "to"};
const std::vector<std::string> precision_keys = study_section_keys("precision");
const std::vector<std::string> fit_keys = study_section_keys("fit");
const std::vector<std::string> evaluation_keys = study_section_keys("evaluation");
const std::vector<std::string> planner_keys = study_section_keys("planner");
const std::vector<std::string> target_keys = study_section_keys("targets");

std::vector<std::string> strategy_names() {
  std::vector<std::string> out;
  for (Strategy s : all_strategies) out.emplace_back(name(s));
  return out;
}

std::vector<std::string> pilot_policy_names() {
  std::vector<std::string> out;
  for (PilotPolicyKind p : all_pilot_policies) out.emplace_back(name(p));
  return out;
}

std::vector<std::string> measure_names() {
  std::vector<std::string> out;
  for (Measure m : all_measures) out.emplace_back(name(m));
  return out;
}

// How a swept value is read (and written canonically) before it is checked in place.
using Kind = SweepKind;

const std::vector<std::pair<std::string, Kind>> sweepable = sweepable_study_keys();

std::vector<std::string> sweepable_paths() {
  std::vector<std::string> out;
  for (const auto& [path, kind] : sweepable) out.push_back(path);
  return out;
}

// Keys that exist but cannot be swept, with the reason given to the user.
std::vector<std::pair<std::string, std::string>> sweep_refusals() {
  std::vector<std::pair<std::string, std::string>> out;
  for (const char* k : {"name", "seed"})
    out.emplace_back(k, "is a setting of the whole study, not of a scenario, and cannot be swept");
  out.emplace_back("environment.file", "cannot be swept: a study has one model file (write one study per model)");
  out.emplace_back("environment.model", "cannot be swept: it is a mapping, and a study has one model");
  out.emplace_back("environment.data", "cannot be swept: a study has one set of records (write one study per record)");
  out.emplace_back("environment.codebook", "cannot be swept: a study has one set of records");
  out.emplace_back("environment.latent_states", "cannot be swept: the records are fitted once per study");
  out.emplace_back("environment.records", "cannot be swept: it is what the records are");
  for (const char* k : {"budgets.logged", "budgets.pilot", "strategies", "measures"})
    out.emplace_back(k, "is a list, and only single-valued keys can be swept (every scenario uses the whole list)");
  const std::pair<const char*, const char*> sections[] = {
      {"environment", "environment.observation_noise"}, {"logging", "logging.privilege"},
      {"pilot", "pilot.policy"},         {"fit", "fit.prior"},
      {"evaluation", "evaluation.trajectories"},        {"planner", "planner.belief_points"},
      {"targets", "targets.model_kl"}};
  for (const auto& [section, example] : sections)
    out.emplace_back(section, fmt::format("is a section; sweep one of its single-valued keys instead, e.g. {}", example));
  out.emplace_back("budgets", "is a section of lists, and lists cannot be swept (every scenario uses the whole list)");
  out.emplace_back("sweep", "cannot be swept");
  for (const StudyKey& k : study_keys())  // any other key of the table that is not sweepable
    if (k.sweep == SweepKind::none &&
        std::none_of(out.begin(), out.end(), [&](const auto& r) { return r.first == k.path; }))
      out.emplace_back(std::string(k.path), "cannot be swept");
  return out;
}

Kind kind_of(const std::string& path) {
  for (const auto& [p, kind] : sweepable)
    if (p == path) return kind;
  throw std::logic_error("not a sweepable key: " + path);
}

// Allowed values of a real-valued setting.
struct Range {
  const char* text;
  bool (*ok)(double);
};
const Range unit_interval{"in [0, 1]", [](double x) { return x >= 0.0 && x <= 1.0; }};
const Range positive{"greater than 0", [](double x) { return x > 0.0; }};
const Range non_negative{"at least 0", [](double x) { return x >= 0.0; }};
const Range discount_range{"in (0, 1]", [](double x) { return x > 0.0 && x <= 1.0; }};
const Range below_one{"in [0, 1)", [](double x) { return x >= 0.0 && x < 1.0; }};
const Range open_unit{"in (0, 1)", [](double x) { return x > 0.0 && x < 1.0; }};

std::string number_text(double x) { return fmt::format("{}", x); }

// ---- Limits -------------------------------------------------------------------------------------
// The largest values the computation can hold. Each is refused (InputError naming the key) while
// the study is read, before any scenario is built or anything sized by it is allocated; what a
// study within them needs in memory and time is estimated separately (memory_estimate.hpp,
// cost_estimate.hpp) and refused by `check` and `plan` when the machine cannot hold it.
//  * sizes (environment.states/actions/observations, fit.latent_states): max_model_size
//    (model_file.hpp: forward-backward tables of A x O x Z^2 entries indexed in int).
//  * environment.horizon: 10^4. The exact plan evaluation recurses once per stage (10^4 frames of
//    about 100 bytes, far inside a thread's 8 MiB stack) and H x max |reward| stays finite
//    (model_file.hpp: max_abs_reward).
//  * budgets: 10^7 episodes each, so pilot + logged (2 x 10^7) fits an int, as do episode counts
//    and episode indices x (H + 1) in 64-bit offsets.
//  * budget lists (budgets.pilot, budgets.logged): at most 100 budgets each, counted before any is
//    read. A unit has strategies x logged x pilot rows, and every row is kept until the tables are
//    written: 3 x 100 x 100 = 30000 rows a unit is already far beyond any sensible grid (the worked
//    studies list at most 5), while 10^4 budgets each made 3 x 10^8 rows a unit, and a 98 KB file
//    allocated gigabytes before the memory estimate could refuse it.
//  * draws, replicates: 10^5 each; units (scenarios x draws x replicates): 10^7, in 64-bit
//    arithmetic (the journal, runs.csv and the answer hold every unit's rows).
//  * sweep: at most 10^4 scenarios, the product of the value counts checked without overflow
//    before any scenario is built (16 keys of 16 values would wrap a 64-bit count to 0).
//  * fit.restarts 10^3, fit.max_iterations 10^5: the default study's starts converge in 91 E-steps
//    on average (cap 200), and EM that has not met its tolerance after thousands of accelerated
//    steps is stalled on a flat ridge of the likelihood, where more steps change little (common
//    practice); 10^5 is 500 times the default cap. `plan` limits the cost of every start running to
//    its cap: at 10^6 that bound is 10^4 times a typical start (100 E-steps), so a study of about 2
//    core-hours was bounded at 2 x 10^4.
//  * evaluation.trajectories and planner.rollouts 10^7; planner.belief_points 10^4 (a backup holds
//    points x points doubles: 800 MB at 10^4); planner.exact_histories 10^9.
//  * fit.prior: at most 1e100, so that a row of pseudo-counts (Z x prior) and the objective's
//    prior x sum log q stay finite.
constexpr int max_horizon = 10000;
constexpr int max_budget = 10000000;
constexpr int max_draws = 100000;
constexpr int max_replicates = 100000;
constexpr long long max_units = 10000000;
constexpr std::size_t max_scenarios = 10000;
constexpr int max_restarts = 1000;
constexpr int max_iterations_cap = 100000;
constexpr std::size_t max_budgets_per_list = 100;
constexpr int max_trajectories = 10000000;
constexpr int max_rollouts = 10000000;
constexpr int max_belief_points = 10000;
constexpr int max_exact_histories = 1000000000;
const Range prior_range{"in [0, 1e100]", [](double x) { return x >= 0.0 && x <= 1e100; }};
// environment.prior_concentration: a Dirichlet parameter (posterior_world.hpp), positive; at most
// 1e100 so that counts + c and the Gamma draws stay finite.
const Range concentration_range{"in (0, 1e100]", [](double x) { return x > 0.0 && x <= 1e100; }};
// precision.max_core_hours: above 0, at most 10^6 core-hours (a year of a 100-core cluster; the
// rounds' cost is estimated from counts, cost_estimate.hpp, and must stay a meaningful cap).
const Range core_hour_range{"in (0, 1e6]", [](double x) { return x > 0.0 && x <= 1e6; }};

// ---- Reading ------------------------------------------------------------------------------------

// The checked entries of one mapping of the study ("" for the top level); absent sections are
// empty, so that swept keys of an absent section still apply.
struct Section {
  std::string path;
  std::vector<Entry> entries;

  const Located* find(std::string_view name) const { return input::find_entry(entries, name); }
};

struct SweepAxis {
  std::string path;
  std::vector<Located> values;
  std::vector<std::string> canonical;
};

class StudyParser {
 public:
  explicit StudyParser(const fs::path& file) : in_(file.string()), base_dir_(file.parent_path()) {}

  Study parse(const YAML::Node& node) {
    const Located root{node, "", input::line_of(node)};
    // An empty file (or one holding only comments or '---') is refused rather than read as the
    // example study: it is far more likely a truncated or wrong file than a request for defaults.
    if (!node.IsDefined() || node.IsNull())
      in_.fail(root, "holds no study (the file is empty, or holds only comments); write at least `name: ...` "
                     "(every other key has a default, shown by `dobudget check`)");
    if (!node.IsMap())
      in_.fail(root, "expected a study: a mapping of 'key: value' entries, got " + input::describe(node));
    const Section top{"", in_.entries(root, top_keys)};

    Study study;
    if (const Located* v = top.find("name")) {
      study.name = in_.text(*v);
      check_name(*v, study.name);
    }
    if (const Located* v = top.find("seed")) study.seed = in_.unsigned_whole(*v);

    std::vector<SweepAxis> axes = sweep(top);
    if (std::optional<SweepAxis> policies = policy_list(top)) axes.push_back(std::move(*policies));
    // The number of scenarios, checked before any is built and without overflow.
    std::size_t total = 1;
    for (const SweepAxis& a : axes) {
      if (a.values.size() > max_scenarios / total)
        in_.fail(*top.find("sweep"),
                 fmt::format("makes more than {} scenarios (the product of the numbers of values passes it at {}: "
                             "{} x {}); split the study",
                             max_scenarios, a.path, total, a.values.size()));
      total *= a.values.size();
    }
    long long units = 0;  // scenarios x draws x replicates so far, at most max_units (64-bit)
    std::vector<std::size_t> digit(axes.size(), 0);
    for (std::size_t index = 0; index < total; ++index) {
      Scenario scenario;
      scenario.index = static_cast<int>(index);
      overrides_.clear();
      for (std::size_t k = 0; k < axes.size(); ++k) {
        overrides_.emplace(axes[k].path, axes[k].values[digit[k]]);
        scenario.assignments.emplace_back(axes[k].path, axes[k].canonical[digit[k]]);
        scenario.label += (k ? ", " : "") + axes[k].path + "=" + axes[k].canonical[digit[k]];
      }
      scenario.settings = settings(top);
      const EnvironmentSettings& env = scenario.settings.environment;
      units += static_cast<long long>(env.given ? 1 : env.draws) * scenario.settings.replicates;  // records: draws
      if (units > max_units) {
        const Located at = units_driver(top, scenario.settings, total);
        in_.fail(at,
                 fmt::format("makes more than {} units (scenarios x environment.draws x replicates{}); split the "
                             "study or use fewer draws or replicates",
                             max_units, total > 1 ? fmt::format(", {} scenarios", total) : ""));
      }
      study.scenarios.push_back(std::move(scenario));
      for (std::size_t k = axes.size(); k-- > 0;) {  // the last key varies fastest
        if (++digit[k] < axes[k].values.size()) break;
        digit[k] = 0;
      }
    }
    study.precision = precision(top, study.scenarios);
    return study;
  }

 private:
  // A study name is text for people: pages, figure titles and tables show it (escaped for each),
  // and the default run directory is derived from it (file_name.hpp). It must be non-empty, at most
  // max_name_bytes long, valid UTF-8 and free of control characters (line breaks, tabs, escapes,
  // bidirectional overrides): it must read back unchanged through printable_line.
  void check_name(const Located& v, const std::string& name) const {
    constexpr std::size_t max_name_bytes = 200;
    if (name.empty()) in_.fail(v, "must not be empty");
    if (name.size() > max_name_bytes)
      in_.fail(v, fmt::format("must be at most {} bytes long, got {}", max_name_bytes, name.size()));
    for (std::size_t i = 0; i < name.size(); ++i) {
      const auto c = static_cast<unsigned char>(name[i]);
      if (c < 0x20 || c == 0x7f)
        in_.fail(v, fmt::format("must not hold control characters (line breaks, tabs, escapes); found byte 0x{:02x} "
                                "at position {}",
                                c, i + 1));
    }
    if (const auto bad = first_invalid_utf8(name))
      in_.fail(v, fmt::format("must be UTF-8 text; the byte at position {} is not", *bad + 1));
    // C1 controls, line and paragraph separators, bidirectional overrides (text_escape.hpp).
    if (printable_line(name) != name)
      in_.fail(v, "must not hold control characters (C1 controls, line separators, bidirectional overrides)");
  }

  // Where the units limit is passed: of the factors of scenarios x environment.draws x replicates
  // the study writes (the sweep, and draws and replicates in place or swept), the largest; the
  // defaults alone (1 x 4 x 10) never pass it.
  Located units_driver(const Section& top, const ScenarioSettings& s, std::size_t scenarios) const {
    const Section env = section(top, "environment", environment_keys);
    const std::pair<double, std::optional<Located>> factors[] = {
        {static_cast<double>(s.replicates), get(top, "replicates")},
        {static_cast<double>(s.environment.given ? 1 : s.environment.draws), get(env, "draws")},
        {static_cast<double>(scenarios), top.find("sweep") ? std::optional<Located>(*top.find("sweep")) : std::nullopt}};
    const std::pair<double, std::optional<Located>>* best = nullptr;
    for (const auto& f : factors)
      if (f.second && (!best || f.first > best->first)) best = &f;
    if (best) return *best->second;
    return Located{YAML::Node(), "replicates", 1};  // not reached: see above
  }

  Section section(const Section& top, std::string_view name, const std::vector<std::string>& keys) const {
    if (const Located* v = top.find(name)) return Section{v->key, in_.entries(*v, keys)};
    return Section{std::string(name), {}};
  }

  // The value of a key of a section in the current scenario: its sweep value, if swept.
  std::optional<Located> get(const Section& s, std::string_view name) const {
    if (auto it = overrides_.find(input::child_key(s.path, name)); it != overrides_.end()) return it->second;
    if (const Located* v = s.find(name)) return *v;
    return std::nullopt;
  }

  int whole(const Section& s, std::string_view name, int fallback, int min, int max) const {
    const std::optional<Located> v = get(s, name);
    if (!v) return fallback;
    const int x = in_.whole_int(*v, min);
    if (x > max) in_.fail(*v, fmt::format("must be at most {} (the largest the computation holds), got {}", max, x));
    return x;
  }

  double number(const Section& s, std::string_view name, double fallback, const Range& range) const {
    const std::optional<Located> v = get(s, name);
    if (!v) return fallback;
    const double x = in_.number(*v);
    if (!range.ok(x)) in_.fail(*v, fmt::format("must be {}, got {}", range.text, x));
    return x;
  }

  void uniform_policy(const Section& s) const {
    if (const std::optional<Located> v = get(s, "policy")) {
      const std::string p = in_.text(*v);
      if (p != "uniform") in_.fail(*v, fmt::format("only 'uniform' is supported for now, got '{}'", p));
    }
  }

  // pilot.policy: one name, or (issue 13) a list of names, read as a sweep axis over pilot.policy
  // added after the sweep's keys (varying fastest), so that the policies are compared on paired
  // scenarios: the same worlds, logged data and evaluation histories (seeding.hpp).
  PilotPolicyKind pilot_policy(const Section& s) const {
    const std::optional<Located> v = get(s, "policy");
    if (!v) return PilotPolicyKind::uniform;
    const std::string p = in_.text(*v);
    const std::optional<PilotPolicyKind> k = parse_pilot_policy(p);
    if (!k) in_.fail(*v, input::unknown_name("pilot policy", p, pilot_policy_names()));
    return *k;
  }

  std::optional<SweepAxis> policy_list(const Section& top) const {
    const Section pilot = section(top, "pilot", pilot_keys);
    const Located* v = pilot.find("policy");
    if (!v || !v->node.IsSequence()) return std::nullopt;
    if (const Located* sw = top.find("sweep"); sw && sw->node.IsMap() && sw->node["pilot.policy"])
      in_.fail(*v, "is a list and sweep.pilot.policy is given too; give the policies in one place");
    if (v->node.size() > max_scenarios)
      in_.fail(*v, fmt::format("lists {} values, more than the {} scenarios a study may have", v->node.size(),
                               max_scenarios));
    SweepAxis axis{"pilot.policy", in_.items(*v), {}};
    if (axis.values.empty()) in_.fail(*v, "must list at least one pilot policy");
    for (std::size_t i = 0; i < axis.values.size(); ++i) {
      const std::string p = in_.text(axis.values[i]);
      if (!parse_pilot_policy(p)) in_.fail(axis.values[i], input::unknown_name("pilot policy", p, pilot_policy_names()));
      for (std::size_t j = 0; j < i; ++j)
        if (axis.canonical[j] == p)
          in_.fail(axis.values[i], fmt::format("'{}' is listed twice (first as {})", p, axis.values[j].key));
      axis.canonical.push_back(p);
    }
    return axis;
  }

  ScenarioSettings settings(const Section& top) {
    ScenarioSettings s;
    s.environment = environment(top);

    // The worlds of a study from records carry their own loggers (the fitted decision rule), so the
    // logging model does not apply to them: refused rather than silently ignored.
    if (s.environment.records) {
      const char* why = "does not apply to a study from records (environment.data): each plausible world's loggers "
                        "are the decision rule fitted to the records";
      if (const std::optional<Located> v = get(top, "logging")) in_.fail(*v, why);
      for (const auto& [path, value] : overrides_)
        if (path.rfind("logging.", 0) == 0) in_.fail(value, why);
    }
    const Section logging = section(top, "logging", logging_keys);
    s.logging.privilege = number(logging, "privilege", s.logging.privilege, unit_interval);
    s.logging.temperature = number(logging, "temperature", s.logging.temperature, positive);
    s.logging.q_discount = number(logging, "q_discount", s.logging.q_discount, below_one);

    const Section pilot = section(top, "pilot", pilot_keys);
    s.pilot.policy = pilot_policy(pilot);
    s.pilot.explore = number(pilot, "explore", s.pilot.explore, unit_interval);
    s.pilot.floor = number(pilot, "floor", s.pilot.floor, unit_interval);

    const Section budgets = section(top, "budgets", budget_keys);
    // From records, the logged budget defaults to the number of logged episodes they hold.
    const std::vector<int> logged_default =
        s.environment.records ? std::vector<int>{s.environment.records->logged_episodes} : s.logged_budgets;
    s.logged_budgets = budget_list(budgets, "logged", logged_default, 0, max_budget);
    const std::optional<Located> pilot_value = get(budgets, "pilot");
    if (pilot_value && pilot_value->node.IsMap()) {
      s.pilot_range = pilot_range(*pilot_value);
      s.pilot_budgets = coarse_grid(*s.pilot_range);
    } else {
      s.pilot_budgets = budget_list(budgets, "pilot", s.pilot_budgets, 0, max_budget);
    }
    s.pilot_rounds = pilot_rounds(budgets, s);
    // A pilot budget of 0 fits the strategies that use logged data on logged data alone, so it
    // needs logged episodes (pilot-only with no data counts as not meeting the target: unit.hpp).
    if (s.pilot_budgets.front() == 0 && s.logged_budgets.back() == 0)
      in_.fail(in_.items(*get(budgets, "pilot")).front(),
               "is 0 pilot episodes, which needs logged episodes (budgets.logged has none above 0): with neither, "
               "there is no data to fit; give a pilot budget of at least 1 or logged budgets above 0");

    s.replicates = whole(top, "replicates", s.replicates, 1, max_replicates);
    s.strategies = name_list(top, "strategies", "strategy", s.strategies, strategy_names(), parse_strategy);
    s.measures = name_list(top, "measures", "measure", s.measures, measure_names(), parse_measure);
    if (s.environment.records && !s.environment.records->rewards &&
        std::find(s.measures.begin(), s.measures.end(), Measure::return_gap) != s.measures.end())
      in_.fail(get(top, "measures") ? *get(top, "measures") : *top.find("environment"),
               "return_gap needs a reward for every observation code, and the records have none: give "
               "environment.codebook with `rewards: {code: value, ...}`, or measure model_kl only");

    const Section fit = section(top, "fit", fit_keys);
    const int states = s.environment.given ? s.environment.given->model.states : s.environment.family.states;
    s.fit.latent_states = whole(fit, "latent_states", states, 1, max_model_size);
    // From records with latent_states: auto, fit.latent_states not written follows the chosen size
    // (records_study.hpp sets it once the records are fitted).
    if (s.environment.records) s.environment.records->fit_follows = !get(fit, "latent_states") && s.environment.records->latent_states == 0;
    s.fit.restarts = whole(fit, "restarts", s.fit.restarts, 1, max_restarts);
    s.fit.max_restarts = whole(fit, "max_restarts", s.fit.max_restarts, 1, max_restarts);
    s.fit.max_iterations = whole(fit, "max_iterations", s.fit.max_iterations, 1, max_iterations_cap);
    s.fit.tolerance = number(fit, "tolerance", s.fit.tolerance, positive);
    s.fit.prior = number(fit, "prior", s.fit.prior, prior_range);

    const Section evaluation = section(top, "evaluation", evaluation_keys);
    s.evaluation.trajectories = whole(evaluation, "trajectories", s.evaluation.trajectories, 1, max_trajectories);
    uniform_policy(evaluation);

    const Section planner = section(top, "planner", planner_keys);
    s.planner.belief_points = whole(planner, "belief_points", s.planner.belief_points, 1, max_belief_points);
    if (const std::optional<Located> v = get(planner, "seed")) s.planner.seed = in_.unsigned_whole(*v);
    s.planner.exact_histories = whole(planner, "exact_histories", s.planner.exact_histories, 0, max_exact_histories);
    s.planner.rollouts = whole(planner, "rollouts", s.planner.rollouts, 2, max_rollouts);

    s.targets = targets(top, s.measures);
    s.assurance = number(top, "assurance", s.assurance, open_unit);
    return s;
  }

  EnvironmentSettings environment(const Section& top) {
    const Section env = section(top, "environment", environment_keys);
    if (const std::optional<Located> data = get(env, "data")) return records_environment(env, *data);
    for (const std::string& k : records_only_keys)
      if (const std::optional<Located> v = get(env, k))
        in_.fail(*v, "is a setting of a study from records and needs environment.data (the episodes file)");
    EnvironmentSettings e;
    e.horizon = whole(env, "horizon", e.horizon, 1, max_horizon);
    e.discount = number(env, "discount", e.discount, discount_range);
    const std::optional<Located> file = get(env, "file");
    const std::optional<Located> model = get(env, "model");
    if (!file && !model) {
      e.family.states = whole(env, "states", e.family.states, 1, max_model_size);
      e.family.actions = whole(env, "actions", e.family.actions, 1, max_model_size);
      e.family.observations = whole(env, "observations", e.family.observations, 1, max_model_size);
      e.family.dynamics_concentration =
          number(env, "dynamics_concentration", e.family.dynamics_concentration, positive);
      e.family.observation_noise = number(env, "observation_noise", e.family.observation_noise, unit_interval);
      e.draws = whole(env, "draws", e.draws, 1, max_draws);
      return e;
    }
    const char* given_by = file ? "environment.file" : "environment.model";
    if (file && model) in_.fail(*model, "give either environment.file or environment.model, not both");
    for (const std::string& k : family_keys)
      if (const std::optional<Located> v = get(env, k))
        in_.fail(*v, fmt::format("is a setting of the synthetic family and cannot be combined with {}: the model "
                                 "fixes the environment",
                                 given_by));
    e.draws = whole(env, "draws", 1, 1, max_draws);
    if (e.draws != 1)
      in_.fail(*get(env, "draws"),
               fmt::format("must be 1 with {}: a model is one environment, got {}", given_by, e.draws));
    if (!given_) given_ = file ? model_file(*file) : parse_model(model->node, in_.file(), model->key, 1, 1.0);
    e.given = *given_;
    e.given->model.horizon = e.horizon;
    e.given->model.discount = e.discount;
    return e;
  }

  // environment: { data: episodes.csv, codebook: codebook.yaml, draws: 16, latent_states: auto,
  //                prior_concentration: 1, horizon: <longest episode>, discount: 1 } (records_study.hpp).
  // The records are read once, here, unless the study carries their facts (environment.records, as
  // a resolved study does): then the files are read, and checked against the facts, only when
  // worlds are needed (prepare_records).
  EnvironmentSettings records_environment(const Section& env, const Located& data) {
    for (const char* k : {"file", "model"})
      if (const std::optional<Located> v = get(env, k)) in_.fail(*v, "give either environment.data or environment.file/model, not both");
    for (const std::string& k : family_keys)
      if (const std::optional<Located> v = get(env, k))
        in_.fail(*v, "is a setting of the synthetic family and cannot be combined with environment.data: the records "
                     "fix the sizes");
    EnvironmentSettings e;
    RecordsSettings r;
    // With the facts written (a resolved study), the files are needed only when worlds are drawn.
    const bool read_now = !get(env, "records");
    r.data = resolved_path(data, "episodes file", read_now);
    if (const std::optional<Located> v = get(env, "codebook")) r.codebook = resolved_path(*v, "codebook", read_now);
    if (const std::optional<Located> v = get(env, "latent_states")) {
      if (in_.text(*v) != "auto") {
        r.latent_states = in_.whole_int(*v, 1);
        if (r.latent_states > max_model_size)
          in_.fail(*v, fmt::format("must be auto or at most {} (the largest the computation holds), got {}", max_model_size,
                                   r.latent_states));
      }
    }
    r.concentration = number(env, "prior_concentration", r.concentration, concentration_range);
    if (!records_) records_ = records_facts(env, r);
    r.digest = records_->digest;
    r.logged_episodes = records_->logged_episodes;
    r.pilot_episodes = records_->pilot_episodes;
    r.rewards = records_->rewards;
    r.longest_episode = records_->longest_episode;
    if (records_->logged_episodes + records_->pilot_episodes == 0) in_.fail(data, "the records hold no episodes");
    if (records_->action_codes < 1 || records_->longest_episode < 1)
      in_.fail(data, "no episode of the records takes an action, so there is nothing to fit");
    e.horizon = whole(env, "horizon", std::min(records_->longest_episode, max_horizon), 1, max_horizon);
    e.discount = number(env, "discount", e.discount, discount_range);
    e.draws = whole(env, "draws", 16, 1, max_draws);
    // The family's sizes stand for the records' (estimates, tables): the latent size, or the largest
    // that auto tries until the records are fitted.
    e.family.states = r.latent_states > 0                 ? r.latent_states
                      : records_->chosen_latent_states > 0 ? records_->chosen_latent_states
                                                           : SelectionSettings{}.sizes.back();
    r.chosen_latent_states = records_->chosen_latent_states;
    e.family.actions = records_->action_codes;
    e.family.observations = records_->observation_codes;
    e.records = std::move(r);
    return e;
  }

  // The facts of the records: from environment.records when the study carries them, else read
  // from the files.
  RecordsFacts records_facts(const Section& env, const RecordsSettings& r) const {
    if (const std::optional<Located> v = get(env, "records")) {
      const Section facts{v->key, in_.entries(*v, records_fact_keys)};
      RecordsFacts f;
      for (const std::string& k : records_fact_keys)
        if (!facts.find(k) && k != "chosen_latent_states") in_.fail(*v, fmt::format("is missing `{}` (environment.records is written by dobudget: "
                                                     "leave it out and the records are read)", k));
      f.digest = in_.text(*facts.find("digest"));
      f.logged_episodes = whole(facts, "logged_episodes", 0, 0, max_budget);
      f.pilot_episodes = whole(facts, "pilot_episodes", 0, 0, max_budget);
      f.longest_episode = whole(facts, "longest_episode", 0, 0, max_horizon);
      f.observation_codes = whole(facts, "observation_codes", 1, 1, max_model_size);
      f.action_codes = whole(facts, "action_codes", 1, 1, max_model_size);
      const std::string rw = in_.text(*facts.find("rewards"));
      if (rw != "true" && rw != "false") in_.fail(*facts.find("rewards"), "must be true or false");
      f.rewards = rw == "true";
      f.chosen_latent_states = whole(facts, "chosen_latent_states", 0, 1, max_model_size);
      return f;
    }
    const EpisodeRecords rec = read_records(r.data, r.codebook);
    return facts_of(rec, records_digest(r.data, r.codebook));
  }

  // A file named in the study, resolved relative to the study file's directory (absolute, so that
  // the resolved study in a run directory names the same file).
  std::string resolved_path(const Located& value, std::string_view what, bool must_exist) const {
    const std::string written = in_.text(value);
    if (written.empty()) in_.fail(value, fmt::format("must name the {}", what));
    fs::path path(written);
    if (path.is_relative()) path = base_dir_ / path;
    path = fs::absolute(path).lexically_normal();
    std::error_code ec;
    if (must_exist && !fs::is_regular_file(path, ec))
      in_.fail(value, fmt::format("cannot read the {} '{}': {}", what, path.string(),
                                  fs::exists(path, ec) ? "not a regular file" : "no such file"));
    return path.string();
  }

  // The model named by environment.file, resolved relative to the study file's directory.
  Environment model_file(const Located& value) const {
    const std::string written = in_.text(value);
    if (written.empty()) in_.fail(value, "must name a model file");
    fs::path path(written);
    if (path.is_relative()) path = base_dir_ / path;
    std::error_code ec;
    if (!fs::is_regular_file(path, ec))
      in_.fail(value, fmt::format("cannot read the model file '{}': {}", path.string(),
                                  fs::exists(path, ec) ? "not a regular file" : "no such file"));
    return load_model(path, 1, 1.0);  // horizon and discount are the study's, set by the caller
  }

  // budgets.pilot: { from, to } (range mode): 1 <= from < to <= max_budget. From 1, not 0: the
  // downward search reaches 0 by itself when the study has logged episodes (precision_search.hpp).
  PilotRange pilot_range(const Located& v) const {
    const Section range{v.key, in_.entries(v, pilot_range_keys)};
    for (const char* k : {"from", "to"})
      if (!range.find(k))
        in_.fail(v, fmt::format("a range of pilot budgets needs both from and to (e.g. {{ from: 10, to: 3000 }}); {} "
                                "is missing",
                                k));
    PilotRange r;
    r.from = whole(range, "from", 0, 1, max_budget);
    r.to = whole(range, "to", 0, 1, max_budget);
    if (r.to <= r.from)
      in_.fail(*range.find("to"), fmt::format("must be larger than budgets.pilot.from ({}), got {}", r.from, r.to));
    return r;
  }

  // budgets.pilot_rounds: the round of each pilot budget, written by range-mode runs into the
  // study of each round (precision_search.hpp); one whole number from 1 to max_rounds per budget.
  std::vector<int> pilot_rounds(const Section& budgets, const ScenarioSettings& s) const {
    const std::optional<Located> v = get(budgets, "pilot_rounds");
    if (!v) return {};
    if (s.pilot_range)
      in_.fail(*v, "cannot be combined with a range of pilot budgets (budgets.pilot: { from, to }): the range mode "
                   "chooses the rounds itself");
    if (v->node.IsSequence() && v->node.size() != s.pilot_budgets.size())
      in_.fail(*v, fmt::format("must give one round per pilot budget ({}), got {}", s.pilot_budgets.size(),
                               v->node.size()));
    const std::vector<Located> items = in_.items(*v);
    if (items.size() != s.pilot_budgets.size())
      in_.fail(*v, fmt::format("must give one round per pilot budget ({}), got {}", s.pilot_budgets.size(), items.size()));
    std::vector<int> out;
    for (const Located& item : items) {
      const int x = in_.whole_int(item, 1);
      if (x > max_search_rounds)
        in_.fail(item, fmt::format("must be at most {} (the most rounds a range-mode run makes), got {}",
                                   max_search_rounds, x));
      out.push_back(x);
    }
    return out;
  }

  // precision: { relative, max_core_hours }, the stop rule of the range mode; it needs
  // budgets.pilot as a range, and a range without it gets the defaults.
  std::optional<PrecisionSettings> precision(const Section& top, const std::vector<Scenario>& scenarios) const {
    const bool range = scenarios.front().settings.pilot_range.has_value();
    const Located* v = top.find("precision");
    if (!v) return range ? std::optional<PrecisionSettings>(PrecisionSettings{}) : std::nullopt;
    if (!range)
      in_.fail(*v, "needs budgets.pilot as a range, e.g. budgets: { pilot: { from: 10, to: 3000 } }: with a list of "
                   "budgets there is nothing to search");
    const Section p{v->key, in_.entries(*v, precision_keys)};
    PrecisionSettings out;
    out.relative = number(p, "relative", out.relative, open_unit);
    out.max_core_hours = number(p, "max_core_hours", out.max_core_hours, core_hour_range);
    return out;
  }

  std::vector<int> budget_list(const Section& s, std::string_view name, std::vector<int> fallback, int min,
                               int max) const {
    const std::optional<Located> v = get(s, name);
    if (!v) return fallback;
    if (v->node.IsSequence() && v->node.size() > max_budgets_per_list)  // counted before the budgets are read
      in_.fail(*v, fmt::format("lists {} budgets, more than the {} a list may hold (every unit fits and keeps "
                               "strategies x logged x pilot budgets); choose fewer budgets",
                               v->node.size(), max_budgets_per_list));
    const std::vector<Located> items = in_.items(*v);
    if (items.empty()) in_.fail(*v, "must list at least one budget");
    std::vector<int> out;
    for (const Located& item : items) {
      const int x = in_.whole_int(item, min);
      if (x > max)
        in_.fail(item, fmt::format("must be at most {} episodes (the largest budget the computation holds), got {}",
                                   max, x));
      if (!out.empty() && x <= out.back())
        in_.fail(item, fmt::format("must be larger than the previous budget ({}): budgets are strictly increasing; "
                                   "got {}",
                                   out.back(), x));
      out.push_back(x);
    }
    return out;
  }

  template <class T, class Parse>
  std::vector<T> name_list(const Section& s, std::string_view key, std::string_view what, std::vector<T> fallback,
                           const std::vector<std::string>& valid, Parse parse) const {
    const std::optional<Located> v = get(s, key);
    if (!v) return fallback;
    const std::vector<Located> items = in_.items(*v);
    if (items.empty()) in_.fail(*v, fmt::format("must list at least one {}", what));
    std::vector<T> out;
    for (std::size_t i = 0; i < items.size(); ++i) {
      const std::string text = in_.text(items[i]);
      const std::optional<T> x = parse(text);
      if (!x) in_.fail(items[i], input::unknown_name(what, text, valid));
      for (std::size_t j = 0; j < i; ++j)
        if (out[j] == *x) in_.fail(items[i], fmt::format("'{}' is listed twice (first as {})", text, items[j].key));
      out.push_back(*x);
    }
    return out;
  }

  std::map<Measure, double> targets(const Section& top, const std::vector<Measure>& measures) const {
    const auto measured = [&](Measure m) { return std::find(measures.begin(), measures.end(), m) != measures.end(); };
    const Section t = section(top, "targets", target_keys);
    const bool swept = std::any_of(overrides_.begin(), overrides_.end(),
                                   [](const auto& o) { return o.first.rfind("targets.", 0) == 0; });
    std::map<Measure, double> out;
    if (!top.find("targets") && !swept) {
      if (measured(Measure::model_kl)) out[Measure::model_kl] = 0.02;
      return out;
    }
    for (Measure m : all_measures) {
      const std::optional<Located> v = get(t, name(m));
      if (!v) continue;
      const double x = number(t, name(m), 0.0, positive);
      if (!measured(m)) {
        std::vector<std::string> names;
        for (Measure k : measures) names.emplace_back(name(k));
        in_.fail(*v, fmt::format("is a target for {}, which is not measured (measures: [{}]); add it to measures or "
                                 "remove the target",
                                 name(m), input::join(names)));
      }
      out[m] = x;
    }
    return out;
  }

  std::vector<SweepAxis> sweep(const Section& top) const {
    const Located* v = top.find("sweep");
    if (!v) return {};
    if (v->node.IsDefined() && !v->node.IsNull() && !v->node.IsMap())
      in_.fail(*v, "expected a mapping from setting keys (e.g. logging.privilege) to lists of values, got " +
                       input::describe(v->node));
    std::vector<SweepAxis> axes;
    for (const Entry& e : in_.entries(*v, sweepable_paths(), sweep_refusals())) {
      SweepAxis axis{e.name, {}, {}};
      if (!e.value.node.IsSequence())
        in_.fail(e.value, "expected a non-empty list of values, got " + input::describe(e.value.node));
      // Counted before the values are read: each is compared with those before it (quadratic time),
      // and an axis of more than max_scenarios values makes too many scenarios anyway.
      if (e.value.node.size() > max_scenarios)
        in_.fail(e.value, fmt::format("lists {} values, more than the {} scenarios a study may have; split the study",
                                      e.value.node.size(), max_scenarios));
      axis.values = in_.items(e.value);
      if (axis.values.empty()) in_.fail(e.value, "must list at least one value");
      for (std::size_t i = 0; i < axis.values.size(); ++i) {
        const Located& item = axis.values[i];
        std::string canonical;
        switch (kind_of(e.name)) {
          case Kind::whole: canonical = fmt::format("{}", in_.whole(item)); break;
          case Kind::seed: canonical = fmt::format("{}", in_.unsigned_whole(item)); break;
          case Kind::number: canonical = number_text(in_.number(item)); break;
          case Kind::text: canonical = in_.text(item); break;
          case Kind::none: throw std::logic_error("not a sweepable key: " + e.name);  // sweepable lists none
        }
        for (std::size_t j = 0; j < i; ++j)
          if (axis.canonical[j] == canonical)
            in_.fail(item, fmt::format("value {} is listed twice (first as {})", canonical, axis.values[j].key));
        axis.canonical.push_back(std::move(canonical));
      }
      axes.push_back(std::move(axis));
    }
    return axes;
  }

  Reader in_;
  fs::path base_dir_;
  std::map<std::string, Located> overrides_;  // swept key path -> value, for the scenario being read
  std::optional<Environment> given_;          // the given model, read once (it cannot be swept)
  std::optional<RecordsFacts> records_;       // the records' facts, read once (they cannot be swept)
};

// ---- Writing ------------------------------------------------------------------------------------

// The sweep axes behind the scenarios (key, values in order), after checking that the scenarios
// are their cartesian product in expansion order.
std::vector<std::pair<std::string, std::vector<std::string>>> sweep_axes(const Study& study) {
  const auto not_a_sweep = [] {
    throw std::invalid_argument("resolved_yaml: the scenarios are not the cartesian product of their assignments");
  };
  std::vector<std::pair<std::string, std::vector<std::string>>> axes;
  for (const auto& [key, value] : study.scenarios.front().assignments) axes.push_back({key, {}});
  for (const Scenario& sc : study.scenarios) {
    if (sc.assignments.size() != axes.size()) not_a_sweep();
    for (std::size_t k = 0; k < axes.size(); ++k) {
      if (sc.assignments[k].first != axes[k].first) not_a_sweep();
      auto& values = axes[k].second;
      if (std::find(values.begin(), values.end(), sc.assignments[k].second) == values.end())
        values.push_back(sc.assignments[k].second);
    }
  }
  std::size_t total = 1;
  for (const auto& a : axes) total *= a.second.size();
  if (total != study.scenarios.size()) not_a_sweep();
  std::vector<std::size_t> digit(axes.size(), 0);
  for (const Scenario& sc : study.scenarios) {
    for (std::size_t k = 0; k < axes.size(); ++k)
      if (sc.assignments[k].second != axes[k].second[digit[k]]) not_a_sweep();
    for (std::size_t k = axes.size(); k-- > 0;) {
      if (++digit[k] < axes[k].second.size()) break;
      digit[k] = 0;
    }
  }
  return axes;
}

}  // namespace

Study parse_study(const std::string& yaml_text, const std::filesystem::path& file) {
  const YAML::Node root = input::parse_yaml(yaml_text, file.string());
  return StudyParser(file).parse(root);
}

Study load_study(const std::filesystem::path& file) {
  return parse_study(input::read_file_text(file, "study file"), file);
}

std::string resolved_yaml(const Study& study) {
  if (study.scenarios.empty()) throw std::invalid_argument("resolved_yaml: a study has at least one scenario");
  const auto axes = sweep_axes(study);
  std::set<std::string> swept;
  for (const auto& a : axes) swept.insert(a.first);
  const ScenarioSettings& s = study.scenarios.front().settings;

  YAML::Emitter out;
  const auto put = [&](const std::string& path, std::string_view key, const std::string& value) {
    if (!swept.count(path)) out << YAML::Key << std::string(key) << YAML::Value << value;
  };
  const auto put_int = [&](const std::string& path, std::string_view key, long long value) {
    put(path, key, fmt::format("{}", value));
  };
  const auto put_number = [&](const std::string& path, std::string_view key, double value) {
    put(path, key, number_text(value));
  };
  const auto put_list = [&](std::string_view key, const auto& values, auto text) {
    out << YAML::Key << std::string(key) << YAML::Value << YAML::Flow << YAML::BeginSeq;
    for (const auto& v : values) out << text(v);
    out << YAML::EndSeq;
  };
  const auto int_text = [](int x) { return fmt::format("{}", x); };

  out << YAML::Comment("dobudget resolved study: every default filled in");
  out << YAML::BeginMap;
  out << YAML::Key << "name" << YAML::Value << YAML::DoubleQuoted << study.name;
  out << YAML::Key << "seed" << YAML::Value << fmt::format("{}", study.seed);

  const EnvironmentSettings& e = s.environment;
  out << YAML::Key << "environment" << YAML::Value << YAML::BeginMap;
  if (e.given) {
    put_int("environment.horizon", "horizon", e.horizon);
    put_number("environment.discount", "discount", e.discount);
    put_int("environment.draws", "draws", e.draws);
    out << YAML::Key << "model" << YAML::Value;
    emit_model(out, *e.given);
  } else if (e.records) {
    const RecordsSettings& r = *e.records;
    if (!r.posterior && r.chosen_latent_states == 0)
      throw std::logic_error("resolved_yaml: the records have not been fitted (records_study.hpp: prepare_records)");
    out << YAML::Key << "data" << YAML::Value << YAML::DoubleQuoted << r.data;
    if (!r.codebook.empty()) out << YAML::Key << "codebook" << YAML::Value << YAML::DoubleQuoted << r.codebook;
    out << YAML::Key << "latent_states" << YAML::Value << (r.latent_states > 0 ? fmt::format("{}", r.latent_states) : "auto");
    put_number("environment.prior_concentration", "prior_concentration", r.concentration);
    put_int("environment.horizon", "horizon", e.horizon);
    put_number("environment.discount", "discount", e.discount);
    put_int("environment.draws", "draws", e.draws);
    out << YAML::Key << "records" << YAML::Value << YAML::BeginMap;
    out << YAML::Key << "digest" << YAML::Value << YAML::DoubleQuoted << r.digest;
    out << YAML::Key << "logged_episodes" << YAML::Value << fmt::format("{}", r.logged_episodes);
    out << YAML::Key << "pilot_episodes" << YAML::Value << fmt::format("{}", r.pilot_episodes);
    out << YAML::Key << "longest_episode" << YAML::Value << fmt::format("{}", r.longest_episode);
    out << YAML::Key << "observation_codes" << YAML::Value << fmt::format("{}", e.family.observations);
    out << YAML::Key << "action_codes" << YAML::Value << fmt::format("{}", e.family.actions);
    out << YAML::Key << "rewards" << YAML::Value << (r.rewards ? "true" : "false");
    out << YAML::Key << "chosen_latent_states" << YAML::Value << fmt::format("{}", e.family.states);
    out << YAML::EndMap;
  } else {
    put_int("environment.states", "states", e.family.states);
    put_int("environment.actions", "actions", e.family.actions);
    put_int("environment.observations", "observations", e.family.observations);
    put_int("environment.horizon", "horizon", e.horizon);
    put_number("environment.discount", "discount", e.discount);
    put_int("environment.draws", "draws", e.draws);
    put_number("environment.dynamics_concentration", "dynamics_concentration", e.family.dynamics_concentration);
    put_number("environment.observation_noise", "observation_noise", e.family.observation_noise);
  }
  out << YAML::EndMap;

  if (!e.records) {  // a study from records has no logging model (its worlds carry their loggers)
    out << YAML::Key << "logging" << YAML::Value << YAML::BeginMap;
    put_number("logging.privilege", "privilege", s.logging.privilege);
    put_number("logging.temperature", "temperature", s.logging.temperature);
    put_number("logging.q_discount", "q_discount", s.logging.q_discount);
    out << YAML::EndMap;
  }

  out << YAML::Key << "pilot" << YAML::Value << YAML::BeginMap;
  put("pilot.policy", "policy", std::string(name(s.pilot.policy)));
  put_number("pilot.explore", "explore", s.pilot.explore);
  put_number("pilot.floor", "floor", s.pilot.floor);
  out << YAML::EndMap;

  out << YAML::Key << "budgets" << YAML::Value << YAML::BeginMap;
  put_list("logged", s.logged_budgets, int_text);
  if (s.pilot_range) {
    out << YAML::Key << "pilot" << YAML::Value << YAML::Flow << YAML::BeginMap;
    out << YAML::Key << "from" << YAML::Value << int_text(s.pilot_range->from);
    out << YAML::Key << "to" << YAML::Value << int_text(s.pilot_range->to);
    out << YAML::EndMap;
  } else {
    put_list("pilot", s.pilot_budgets, int_text);
  }
  if (!s.pilot_rounds.empty()) put_list("pilot_rounds", s.pilot_rounds, int_text);
  out << YAML::EndMap;

  put_int("replicates", "replicates", s.replicates);
  put_list("strategies", s.strategies, [](Strategy x) { return std::string(name(x)); });
  put_list("measures", s.measures, [](Measure x) { return std::string(name(x)); });

  // fit.latent_states may follow a swept environment.states (when it was not given): then it
  // differs between scenarios without being swept, and is left to its default.
  const bool latent_follows =
      !swept.count("fit.latent_states") &&
      std::any_of(study.scenarios.begin(), study.scenarios.end(),
                  [&](const Scenario& sc) { return sc.settings.fit.latent_states != s.fit.latent_states; });
  out << YAML::Key << "fit";
  if (latent_follows) out << YAML::Comment("latent_states left to its default, each scenario's number of states");
  out << YAML::Value << YAML::BeginMap;
  if (!latent_follows) put_int("fit.latent_states", "latent_states", s.fit.latent_states);
  put_int("fit.restarts", "restarts", s.fit.restarts);
  put_int("fit.max_restarts", "max_restarts", s.fit.max_restarts);
  put_int("fit.max_iterations", "max_iterations", s.fit.max_iterations);
  put_number("fit.tolerance", "tolerance", s.fit.tolerance);
  put_number("fit.prior", "prior", s.fit.prior);
  out << YAML::EndMap;

  out << YAML::Key << "evaluation" << YAML::Value << YAML::BeginMap;
  put_int("evaluation.trajectories", "trajectories", s.evaluation.trajectories);
  put("evaluation.policy", "policy", "uniform");
  out << YAML::EndMap;

  out << YAML::Key << "planner" << YAML::Value << YAML::BeginMap;
  put_int("planner.belief_points", "belief_points", s.planner.belief_points);
  put("planner.seed", "seed", fmt::format("{}", s.planner.seed));
  put_int("planner.exact_histories", "exact_histories", s.planner.exact_histories);
  put_int("planner.rollouts", "rollouts", s.planner.rollouts);
  out << YAML::EndMap;

  out << YAML::Key << "targets" << YAML::Value << YAML::BeginMap;
  for (const auto& [measure, target] : s.targets) {
    const std::string key(name(measure));
    put("targets." + key, key, number_text(target));
  }
  out << YAML::EndMap;

  put_number("assurance", "assurance", s.assurance);
  if (study.precision) {
    out << YAML::Key << "precision" << YAML::Value << YAML::BeginMap;
    out << YAML::Key << "relative" << YAML::Value << number_text(study.precision->relative);
    out << YAML::Key << "max_core_hours" << YAML::Value << number_text(study.precision->max_core_hours);
    out << YAML::EndMap;
  }

  if (!axes.empty()) {
    out << YAML::Key << "sweep" << YAML::Value << YAML::BeginMap;
    for (const auto& [key, values] : axes) {
      out << YAML::Key << key << YAML::Value << YAML::Flow << YAML::BeginSeq;
      for (const std::string& v : values) out << v;
      out << YAML::EndSeq;
    }
    out << YAML::EndMap;
  }
  out << YAML::EndMap;
  if (!out.good()) throw std::logic_error("resolved_yaml: " + out.GetLastError());
  return std::string(out.c_str()) + "\n";
}

}  // namespace dobudget::io
