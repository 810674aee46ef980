#include "io/episode_file.hpp"

#include <fmt/format.h>
#include <yaml-cpp/yaml.h>

#include <algorithm>
#include <charconv>
#include <cmath>
#include <limits>
#include <optional>
#include <stdexcept>
#include <string_view>
#include <unordered_map>

#include "io/atomic_file.hpp"
#include "io/csv.hpp"
#include "io/csv_records.hpp"
#include "io/model_file.hpp"
#include "io/text_escape.hpp"
#include "io/yaml_input.hpp"

namespace dobudget::io {
namespace {

using input::Located;
using input::Reader;

const std::vector<std::string> columns{"episode", "step", "observation", "action", "regime"};
enum Column { episode_column, step_column, observation_column, action_column, regime_column };

// User text as quoted in a message: one printable line (text_escape.hpp), at most 40 bytes shown.
std::string shown_text(std::string_view s) {
  return "'" + printable_line(s.size() <= 40 ? s : std::string(s.substr(0, 37)) + "...") + "'";
}

// What is wrong with `text` as an id or a code, or "" when nothing is: it must be 1 to
// max_text_bytes bytes of UTF-8 that printable_line leaves unchanged (no control characters, line
// breaks, bidirectional overrides), so that it can be shown, written to CSV and YAML and read back.
std::string text_problem(std::string_view text) {
  if (text.empty()) return "is empty";
  if (text.size() > max_text_bytes)
    return fmt::format("is {} bytes long, more than the {} an id or a code may have", text.size(), max_text_bytes);
  if (const auto bad = first_invalid_utf8(text))
    return fmt::format("is not UTF-8 text: the byte at position {} is not part of a UTF-8 character", *bad + 1);
  for (std::size_t i = 0; i < text.size(); ++i) {
    const auto c = static_cast<unsigned char>(text[i]);
    if (c < 0x20 || c == 0x7f)
      return fmt::format("holds a control character (byte 0x{:02x} at position {}: a line break, tab or escape) in {}",
                         c, i + 1, shown_text(text));
  }
  if (printable_line(text) != text)
    return "holds a control character (a C1 control, a line separator or a bidirectional override) in " + shown_text(text);
  return "";
}

// ---- Codebook ------------------------------------------------------------------------------------

std::vector<std::string> code_list(const Reader& in, const Located& list, std::string_view kind) {
  if (!list.node.IsSequence()) in.fail(list, "expected a list of " + std::string(kind) + " codes, got " + input::describe(list.node));
  if (list.node.size() == 0) in.fail(list, "must name at least one code");
  if (list.node.size() > static_cast<std::size_t>(max_codes))  // counted before the codes are read
    in.fail(list, fmt::format("has {} codes, more than {} (the most a model holds)", list.node.size(), max_codes));
  std::vector<std::string> codes;
  std::vector<Located> at;
  for (const Located& item : in.items(list)) {
    const std::string code = in.text(item);
    if (const std::string problem = text_problem(code); !problem.empty()) in.fail(item, problem);
    for (std::size_t k = 0; k < codes.size(); ++k)
      if (codes[k] == code) in.fail(item, fmt::format("{} is given twice (first as {})", shown_text(code), at[k].key));
    codes.push_back(code);
    at.push_back(item);
  }
  return codes;
}

}  // namespace

Codebook read_codebook(const std::filesystem::path& file) {
  const std::string name = file.string();
  const YAML::Node root_node = input::parse_yaml(input::read_file_text(file, "codebook"), name);
  const Reader in(name);
  const Located root{root_node, "", input::line_of(root_node)};
  if (!root_node.IsMap())
    in.fail(root, "expected a codebook: a mapping with observations: [...], actions: [...] and optionally rewards: "
                  "{code: value, ...}; got " +
                      input::describe(root_node));
  const std::vector<input::Entry> entries = in.entries(root, {"observations", "actions", "rewards"});
  auto need = [&](std::string_view key) -> const Located& {
    if (const Located* v = input::find_entry(entries, key)) return *v;
    in.fail(root.line, std::string(key), "is missing: a codebook lists the observation codes and the action codes");
  };
  Codebook book;
  book.observations = code_list(in, need("observations"), "observation");
  book.actions = code_list(in, need("actions"), "action");
  if (const Located* r = input::find_entry(entries, "rewards")) {
    if (!r->node.IsMap())
      in.fail(*r, "expected a mapping of observation codes to rewards ({code: value, ...}), got " +
                      input::describe(r->node));
    if (r->node.size() > book.observations.size())  // counted before the rewards are read
      in.fail(*r, fmt::format("gives {} rewards for {} observation codes", r->node.size(), book.observations.size()));
    std::vector<std::optional<double>> rewards(book.observations.size());
    for (const auto& pair : r->node) {
      const YAML::Node& k = pair.first;
      const int key_line = input::line_of(k);
      if (!k.IsScalar()) in.fail(key_line, r->key, "keys must be observation codes, got " + input::describe(k));
      const std::string code = k.Scalar();
      const std::string key = r->key + "." + printable_line(code.size() <= 40 ? code : code.substr(0, 37) + "...");
      const auto it = std::find(book.observations.begin(), book.observations.end(), code);
      if (it == book.observations.end())
        in.fail(key_line, key,
                "is not one of the observation codes (observations: " +
                    printable_line(input::unknown_name("code", code, book.observations)) + ")");
      auto& reward = rewards[static_cast<std::size_t>(it - book.observations.begin())];
      if (reward) in.fail(key_line, key, "is given twice");
      const bool empty = !pair.second.IsDefined() || pair.second.IsNull();
      const Located value{pair.second, key, empty ? key_line : input::line_of(pair.second)};
      reward = in.number(value);
      if (!(std::abs(*reward) <= max_abs_reward))
        in.fail(value, fmt::format("must be at most {:g} in absolute value, got {}", max_abs_reward, *reward));
    }
    for (std::size_t k = 0; k < rewards.size(); ++k)
      if (!rewards[k])
        in.fail(*r, "gives no reward for the observation code " + shown_text(book.observations[k]) +
                        ": give one for every observation code, or leave rewards out (then there are no rewards and "
                        "return_gap cannot be computed)");
    for (const auto& reward : rewards) book.rewards.push_back(*reward);
  }
  return book;
}

std::string codebook_yaml(const Codebook& codebook) {
  YAML::Emitter out;
  out << YAML::BeginMap;
  out << YAML::Key << "observations" << YAML::Value << YAML::Flow << codebook.observations;
  out << YAML::Key << "actions" << YAML::Value << YAML::Flow << codebook.actions;
  if (codebook.has_rewards()) {
    if (codebook.rewards.size() != codebook.observations.size())
      throw std::invalid_argument("codebook_yaml: one reward per observation code expected");
    out << YAML::Key << "rewards" << YAML::Value << YAML::BeginMap;
    for (std::size_t k = 0; k < codebook.rewards.size(); ++k)
      out << YAML::Key << codebook.observations[k] << YAML::Value << fmt::format("{}", codebook.rewards[k]);
    out << YAML::EndMap;
  }
  out << YAML::EndMap;
  if (!out.good()) throw std::logic_error("codebook_yaml: " + out.GetLastError());
  return std::string(out.c_str()) + "\n";
}

Codebook numbered_codebook(const Pomdp& world) {
  Codebook book;
  for (int o = 0; o < world.observations; ++o) book.observations.push_back(fmt::format("o{}", o));
  for (int a = 0; a < world.actions; ++a) book.actions.push_back(fmt::format("a{}", a));
  book.rewards.assign(world.rewards.data(), world.rewards.data() + world.rewards.size());
  return book;
}

EpisodeRecords numbered_records(const Pomdp& world, Dataset logged, Dataset pilot) {
  EpisodeRecords r;
  r.codebook = numbered_codebook(world);
  for (int i = 0; i < logged.count; ++i) r.logged_ids.push_back(fmt::format("logged-{}", i));
  for (int i = 0; i < pilot.count; ++i) r.pilot_ids.push_back(fmt::format("pilot-{}", i));
  r.logged = std::move(logged);
  r.pilot = std::move(pilot);
  return r;
}

// ---- Episodes file -------------------------------------------------------------------------------

namespace {

constexpr std::uint8_t no_action = 255;  // codes are 0..max_codes-1 < 255

// Codes of one kind: given by a codebook (fixed) or numbered in order of first appearance.
class Codes {
 public:
  Codes(const std::vector<std::string>* fixed, std::string kind) : kind_(std::move(kind)) {
    if (fixed)
      for (const std::string& c : *fixed) add(c);
    fixed_ = fixed != nullptr;
  }
  // The index of `code`; a new code is numbered (without a codebook) or refused.
  std::uint8_t index(const std::string& code, const CsvRecords& csv, int line, const std::string& column) {
    if (code == last_code_ && have_last_) return last_;
    const auto it = index_.find(code);
    std::uint8_t k = 0;
    if (it != index_.end()) {
      k = it->second;
    } else {
      if (fixed_) {
        std::string message = shown_text(code) + " is not one of the " + kind_ + " codes of the codebook";
        if (const auto near = input::closest_match(code, codes_)) message += "; did you mean " + shown_text(*near) + "?";
        csv.fail(line, column, message);
      }
      if (const std::string problem = text_problem(code); !problem.empty()) csv.fail(line, column, problem);
      if (static_cast<int>(codes_.size()) >= max_codes)
        csv.fail(line, column,
                 fmt::format("{} is a new {} code, one more than the {} a model holds", shown_text(code), kind_, max_codes));
      k = add(code);
    }
    last_code_ = code, last_ = k, have_last_ = true;
    return k;
  }
  const std::vector<std::string>& codes() const { return codes_; }

 private:
  std::uint8_t add(const std::string& code) {
    const auto k = static_cast<std::uint8_t>(codes_.size());
    codes_.push_back(code);
    index_.emplace(code, k);
    return k;
  }
  std::string kind_;
  bool fixed_ = false;
  std::vector<std::string> codes_;
  std::unordered_map<std::string, std::uint8_t> index_;
  std::string last_code_;
  std::uint8_t last_ = 0;
  bool have_last_ = false;
};

struct Episode {
  std::string id;
  Regime regime = Regime::logged;
  int rows = 0;           // steps read so far: the next step must be `rows`
  int first_line = 0, last_line = 0;
  bool ended = false;     // its last row read so far has no action
};

// "step 0", "steps 0 to 4"
std::string steps_so_far(int rows) { return rows == 1 ? "step 0" : fmt::format("steps 0 to {}", rows - 1); }

}  // namespace

EpisodeRecords read_episodes(const std::filesystem::path& csv_file, const Codebook* codebook) {
  CsvRecords csv(csv_file, max_episode_file_bytes, columns, "episodes file");
  Codes observations(codebook ? &codebook->observations : nullptr, "observation");
  Codes actions(codebook ? &codebook->actions : nullptr, "action");
  std::vector<Episode> episodes;
  std::unordered_map<std::string, std::int32_t> episode_index;
  // One entry per row: its episode, observation and action (no_action on an episode's last row).
  std::vector<std::int32_t> row_episode;
  std::vector<std::uint8_t> row_observation, row_action;

  std::vector<std::string> f;
  std::int32_t current = -1;  // the episode of the previous row: most rows continue it
  std::int64_t regime_count[2] = {0, 0};  // episodes per regime (logged, pilot) so far
  std::int64_t longest_rows = 0;          // rows of the longest episode so far
  while (csv.next(f)) {
    const int line = csv.line();
    // episode
    if (current < 0 || f[episode_column] != episodes[static_cast<std::size_t>(current)].id) {
      const auto it = episode_index.find(f[episode_column]);
      if (it != episode_index.end()) {
        current = it->second;
      } else {
        if (const std::string problem = text_problem(f[episode_column]); !problem.empty())
          csv.fail(line, "episode", problem);
        if (episodes.size() >= max_episodes)
          csv.fail(line, "episode",
                   fmt::format("is the {}th episode of the file, more than the {} a file may hold (the largest budget "
                               "of a study); split the file",
                               episodes.size() + 1, max_episodes));
        current = static_cast<std::int32_t>(episodes.size());
        episode_index.emplace(f[episode_column], current);
        Episode e;
        e.id = f[episode_column];
        e.first_line = line;
        episodes.push_back(std::move(e));
      }
    }
    Episode& e = episodes[static_cast<std::size_t>(current)];
    // step: decimal digits, at most max_episode_actions
    const std::string& step_text = f[step_column];
    int step = -1;
    {
      const bool digits = !step_text.empty() && step_text.size() <= 6 &&
                          std::all_of(step_text.begin(), step_text.end(), [](char c) { return c >= '0' && c <= '9'; });
      if (!digits)
        csv.fail(line, "step", "expected a step number 0, 1, 2, ..., got " + (step_text.empty() ? std::string("nothing") : shown_text(step_text)));
      std::from_chars(step_text.data(), step_text.data() + step_text.size(), step);
      if (step > max_episode_actions)
        csv.fail(line, "step",
                 fmt::format("is {}; an episode has at most {} actions (the longest horizon), so its steps go up to {}",
                             step, max_episode_actions, max_episode_actions));
    }
    const bool first_row = e.rows == 0;
    if (step < e.rows)
      csv.fail(line, "step",
               fmt::format("episode {} step {} is given twice (the episode already has {}, the last on line {})",
                           shown_text(e.id), step, steps_so_far(e.rows), e.last_line));
    if (step > e.rows) {
      if (first_row)
        csv.fail(line, "step",
                 fmt::format("episode {} starts at step {}; the first row of an episode has step 0", shown_text(e.id), step));
      csv.fail(line, "step",
               fmt::format("episode {} goes from step {} (line {}) to step {}: step {} is missing (steps go 0, 1, 2, "
                           "... without gaps)",
                           shown_text(e.id), e.rows - 1, e.last_line, step, e.rows));
    }
    if (!first_row && e.ended)
      csv.fail(e.last_line, "action",
               fmt::format("is missing: episode {} goes on at step {} (line {}); only an episode's last row has no "
                           "action",
                           shown_text(e.id), step, line));
    // observation, action
    const std::uint8_t o = observations.index(f[observation_column], csv, line, "observation");
    const bool has_action = !f[action_column].empty();
    const std::uint8_t a = has_action ? actions.index(f[action_column], csv, line, "action") : no_action;
    // regime
    Regime regime = Regime::logged;
    if (f[regime_column] == "logged") regime = Regime::logged;
    else if (f[regime_column] == "pilot") regime = Regime::pilot;
    else
      csv.fail(line, "regime",
               "is " + shown_text(f[regime_column]) +
                   ", expected logged (recorded under the usual decision-makers) or pilot (under the pilot policy)");
    if (first_row) {
      e.regime = regime;
      ++regime_count[regime == Regime::logged ? 0 : 1];
    } else if (regime != e.regime)
      csv.fail(line, "regime",
               fmt::format("is {}, but episode {} is {} (line {}); an episode has one regime",
                           regime == Regime::logged ? "logged" : "pilot", shown_text(e.id),
                           e.regime == Regime::logged ? "logged" : "pilot", e.first_line));
    ++e.rows;
    longest_rows = std::max<std::int64_t>(longest_rows, e.rows);
    // The padded storage (episodes x longest) bounded while reading, before it grows.
    for (int r = 0; r < 2; ++r)
      if (regime_count[r] * longest_rows > max_episode_slots)
        csv.fail(line, "step",
                 fmt::format("{} {} episodes stored with room for the longest ({} steps so far) need more than {} "
                             "slots; drop the few very long episodes or split the file",
                             regime_count[r], r == 0 ? "logged" : "pilot", longest_rows, max_episode_slots));
    e.last_line = line;
    e.ended = !has_action;
    row_episode.push_back(current);
    row_observation.push_back(o);
    row_action.push_back(a);
  }
  if (episodes.empty())
    csv.fail(csv.line() + 1, "episode", "the file holds a header and no rows; expected one row per step of each episode");

  // Every episode ends at an observation; the first one that does not is named (in file order).
  const Episode* open = nullptr;
  for (const Episode& e : episodes)
    if (!e.ended && (!open || e.last_line < open->last_line)) open = &e;
  if (open)
    csv.fail(open->last_line, "action",
             fmt::format("is given on the last row of episode {} (step {}); an episode's last row has an empty action "
                         "(the record ends at an observation): leave it empty, or add the row of step {}",
                         shown_text(open->id), open->rows - 1, open->rows));

  // The horizon: the longest episode's actions; the padded storage of each regime bounded.
  const Episode* longest = &episodes.front();
  std::int64_t count[2] = {0, 0};
  for (const Episode& e : episodes) {
    if (e.rows > longest->rows) longest = &e;
    ++count[e.regime == Regime::logged ? 0 : 1];
  }
  const int horizon = longest->rows - 1;
  if (horizon < 1)
    csv.fail(longest->first_line, "step",
             "every episode has one row (step 0) only: no episode holds an action, so there is nothing to fit");
  for (int r = 0; r < 2; ++r)
    if (count[r] * (horizon + 1) > max_episode_slots)
      csv.fail(longest->last_line, "step",
               fmt::format("episode {} has {} actions, and every one of the {} {} episodes is stored with room for that "
                           "many: {} slots, more than {}; drop the few very long episodes or split the file",
                           shown_text(longest->id), horizon, count[r], r == 0 ? "logged" : "pilot",
                           count[r] * (horizon + 1), max_episode_slots));

  // Episode index within its regime, in order of first appearance.
  EpisodeRecords records;
  std::vector<std::int32_t> slot(episodes.size());
  std::vector<std::int32_t> filled(episodes.size(), 0);
  bool uneven[2] = {false, false};
  for (std::size_t i = 0; i < episodes.size(); ++i) {
    const bool logged = episodes[i].regime == Regime::logged;
    auto& ids = logged ? records.logged_ids : records.pilot_ids;
    slot[i] = static_cast<std::int32_t>(ids.size());
    ids.push_back(episodes[i].id);
    if (episodes[i].rows - 1 != horizon) uneven[logged ? 0 : 1] = true;
  }
  for (int r = 0; r < 2; ++r) {
    Dataset& d = r == 0 ? records.logged : records.pilot;
    d.horizon = horizon;
    d.count = static_cast<int>(count[r]);
    d.observations.assign(static_cast<std::size_t>(count[r]) * static_cast<std::size_t>(horizon + 1), 0);
    d.actions.assign(static_cast<std::size_t>(count[r]) * static_cast<std::size_t>(horizon), 0);
    if (uneven[r]) d.lengths.assign(static_cast<std::size_t>(count[r]), 0);
  }
  for (std::size_t i = 0; i < episodes.size(); ++i) {
    Dataset& d = episodes[i].regime == Regime::logged ? records.logged : records.pilot;
    if (!d.lengths.empty()) d.lengths[static_cast<std::size_t>(slot[i])] = episodes[i].rows - 1;
  }
  for (std::size_t k = 0; k < row_episode.size(); ++k) {
    const auto i = static_cast<std::size_t>(row_episode[k]);
    Dataset& d = episodes[i].regime == Regime::logged ? records.logged : records.pilot;
    const std::int32_t t = filled[i]++;
    const auto s = static_cast<std::ptrdiff_t>(slot[i]);
    d.observations[static_cast<std::size_t>(s * (horizon + 1) + t)] = row_observation[k];
    if (row_action[k] != no_action) d.actions[static_cast<std::size_t>(s * horizon + t)] = row_action[k];
  }
  if (codebook) {
    records.codebook = *codebook;
  } else {
    records.codebook.observations = observations.codes();
    records.codebook.actions = actions.codes();
  }
  return records;
}

void write_episodes(const std::filesystem::path& csv, const EpisodeRecords& records) {
  const Codebook& book = records.codebook;
  std::string out = input::join(columns, ",") + "\n";
  std::vector<std::string> observation_fields, action_fields;
  for (const auto& c : book.observations) observation_fields.push_back(csv_field(c));
  for (const auto& c : book.actions) action_fields.push_back(csv_field(c));
  const auto write = [&](const Dataset& d, const std::vector<std::string>& ids, const char* regime) {
    if (static_cast<int>(ids.size()) != d.count)
      throw std::invalid_argument(fmt::format("write_episodes: {} {} ids for {} episodes", ids.size(), regime, d.count));
    for (int i = 0; i < d.count; ++i) {
      const std::string id = csv_field(ids[static_cast<std::size_t>(i)]);
      const int length = d.length(i);
      for (int t = 0; t <= length; ++t) {
        const auto o = static_cast<std::size_t>(d.obs(i)[t]);
        if (o >= observation_fields.size()) throw std::invalid_argument("write_episodes: observation outside the codebook");
        out += id;
        out += ',';
        out += std::to_string(t);
        out += ',';
        out += observation_fields[o];
        out += ',';
        if (t < length) {
          const auto a = static_cast<std::size_t>(d.act(i)[t]);
          if (a >= action_fields.size()) throw std::invalid_argument("write_episodes: action outside the codebook");
          out += action_fields[a];
        }
        out += ',';
        out += regime;
        out += '\n';
      }
    }
  };
  write(records.logged, records.logged_ids, "logged");
  write(records.pilot, records.pilot_ids, "pilot");
  write_file_atomically(csv, out);
}

}  // namespace dobudget::io
