// The key table (study_keys.hpp) against the validator, and the study-file reference page
// (docs/study-file.md) against the table. The validator is asked directly (its "expected one of"
// lists, the defaults it fills in, the limits it enforces), so a key it accepts without a row, a
// default or limit stated wrongly, or a stale committed page fails here.
#include <catch2/catch.hpp>

#include "input_error_of.hpp"

#include <cmath>
#include <filesystem>
#include <fstream>
#include <set>
#include <sstream>
#include <string>
#include <vector>

#include <fmt/format.h>
#include <yaml-cpp/yaml.h>

#include "io/input_error.hpp"
#include "io/study_file.hpp"
#include "io/study_keys.hpp"
#include "io/study_reference.hpp"
#include "temp_dir.hpp"

using namespace dobudget;
using dobudget::test::error_of;

namespace {

Study parse(const std::string& text) { return io::parse_study(text, "study.yaml"); }

// A study text that sets one dotted key to `value` (nested mappings for the sections).
std::string with_key(const std::string& path, const std::string& value) {
  const std::size_t dot = path.find('.');
  if (dot == std::string::npos) return path + ": " + value + "\n";
  return path.substr(0, dot) + ":\n  " + path.substr(dot + 1) + ": " + value + "\n";
}

// Keys that only validate beside another key: precision.* needs the range form of budgets.pilot;
// environment.codebook, latent_states, prior_concentration and records need environment.data.
const std::string range_budgets = "budgets:\n  pilot: {from: 10, to: 1000}\n";

bool needs_records(const std::string& path) {
  for (const char* k : {"environment.codebook", "environment.latent_states", "environment.prior_concentration",
                        "environment.records"})
    if (path == k) return true;
  return false;
}

// A small episodes file (the format of io/episode_file.hpp) for the keys that need records.
const std::string& records_file() {
  static const dobudget::test::TempDir dir("dobudget_study_keys");
  static const std::string file =
      dir.write("episodes.csv",
                "episode,step,observation,action,regime\n"
                "e1,0,x,a,logged\ne1,1,y,b,logged\ne1,2,x,,logged\n"
                "e2,0,y,b,logged\ne2,1,y,,logged\n")
          .string();
  return file;
}
const std::string records_environment() { return "environment:\n  data: \"" + records_file() + "\"\n"; }

// A study text that sets `path` to `value` with whatever the key needs beside it.
std::string study_with(const std::string& path, const std::string& value) {
  if (path.rfind("precision.", 0) == 0) return range_budgets + with_key(path, value);
  if (needs_records(path)) return records_environment() + "  " + path.substr(12) + ": " + value + "\n";
  return with_key(path, value);
}

// The names listed after "expected one of: " in a message about an unknown key.
std::vector<std::string> expected_names(const io::InputError& e) {
  const std::string marker = "expected one of: ";
  const std::size_t at = e.message.find(marker);
  REQUIRE(at != std::string::npos);
  std::vector<std::string> out;
  std::stringstream in(e.message.substr(at + marker.size()));
  std::string item;
  while (std::getline(in, item, ',')) {
    while (!item.empty() && item.front() == ' ') item.erase(0, 1);
    out.push_back(item);
  }
  return out;
}

// A key name far from every real one, so that the validator lists all it accepts.
const std::string unknown = "qqqqqqqqqqqqqqqqqqqqqqqq";

// The keys the validator accepts at the top level and one level inside each section, found by
// asking it: each mapping's "expected one of" list.
std::vector<std::string> accepted_paths() {
  std::vector<std::string> out;
  const std::vector<std::string> top = expected_names(error_of([] { parse(unknown + ": 1\n"); }));
  for (const std::string& k : top) {
    out.push_back(k);
    if (k == "sweep") continue;  // its keys are the sweepable paths (checked below)
    std::string text = k + ":\n  " + unknown + ": 1\n";
    if (k == "targets") text = "measures: [model_kl, return_gap]\n" + text;
    if (k == "precision") text = range_budgets + text;
    try {
      parse(text);
    } catch (const io::InputError& e) {
      if (e.key != k + "." + unknown) continue;  // not a section
      for (const std::string& child : expected_names(e)) out.push_back(k + "." + child);
    }
  }
  return out;
}

// YAML scalar or flow list, as the reference writes defaults: "4", "[0, 1000]".
std::string value_text(const YAML::Node& n) {
  if (n.IsScalar()) return n.Scalar();
  std::string s = "[";
  for (std::size_t i = 0; i < n.size(); ++i) s += (i ? ", " : "") + n[i].Scalar();
  return s + "]";
}

std::string source_file(const std::string& relative) {
  std::ifstream in(std::filesystem::path(DOBUDGET_SOURCE_DIR) / relative, std::ios::binary);
  std::ostringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

// "10^5" -> 100000, "2^64-1" -> 18446744073709551615 (as text, for the study file), or the digits.
std::string limit_text(std::string s) {
  if (s == "2^64-1") return "18446744073709551615";
  if (const std::size_t caret = s.find("10^"); caret == 0) return "1" + std::string(std::stoul(s.substr(3)), '0');
  return s;
}

}  // namespace

TEST_CASE("every key the validator accepts has a row in the key table", "[study_keys]") {
  const std::vector<std::string> accepted = accepted_paths();
  CHECK(accepted.size() > 30);  // the probe found the sections (a broken probe finds only the top level)
  for (const std::string& path : accepted) {
    INFO(path);
    CHECK(io::find_study_key(path) != nullptr);
  }
  // ... and every row (apart from sweep's own keys) is a key the validator accepts.
  const std::set<std::string> accepted_set(accepted.begin(), accepted.end());
  for (const io::StudyKey& k : io::study_keys()) {
    INFO(k.path);
    CHECK(accepted_set.count(std::string(k.path)) == 1);
  }
}

TEST_CASE("the sweepable rows are the keys a sweep accepts", "[study_keys]") {
  const std::vector<std::string> swept =
      expected_names(error_of([] { parse("sweep:\n  " + unknown + ": [1]\n"); }));
  std::set<std::string> table;
  for (const auto& [path, kind] : io::sweepable_study_keys()) table.insert(path);
  CHECK(std::set<std::string>(swept.begin(), swept.end()) == table);
  // A row that is not sweepable is refused by name, not as an unknown key.
  for (const io::StudyKey& k : io::study_keys()) {
    if (k.sweep != io::SweepKind::none) continue;
    INFO(k.path);
    const io::InputError e = error_of([&] { parse("sweep:\n  " + std::string(k.path) + ": [1]\n"); });
    CHECK(e.message.find("unknown key") == std::string::npos);
  }
}

TEST_CASE("the table's defaults are the ones the validator fills in", "[study_keys]") {
  // resolved_yaml writes every setting with its default (study_file.hpp).
  const YAML::Node resolved = YAML::Load(io::resolved_yaml(parse("name: example\n")));
  std::set<std::string> written;
  for (const auto& top : resolved) {
    const std::string key = top.first.Scalar();
    const YAML::Node& value = top.second;
    if (value.IsMap()) {
      for (const auto& child : value) {
        const std::string path = key + "." + child.first.Scalar();
        written.insert(path);
        const io::StudyKey* row = io::find_study_key(path);
        INFO(path);
        REQUIRE(row != nullptr);
        if (path == "fit.latent_states")  // "the environment's number of states"
          CHECK(value_text(child.second) == value_text(resolved["environment"]["states"]));
        else
          CHECK(std::string(row->default_text) == value_text(child.second));
      }
    } else {
      written.insert(key);
      const io::StudyKey* row = io::find_study_key(key);
      INFO(key);
      REQUIRE(row != nullptr);
      CHECK(std::string(row->default_text) == value_text(value));
    }
  }
  // Keys that only exist beside another key: their defaults in the resolved study of such a study.
  {
    const YAML::Node r = YAML::Load(io::resolved_yaml(parse(range_budgets + "name: example\n")));
    for (const auto& child : r["precision"]) {
      const std::string path = "precision." + child.first.Scalar();
      const io::StudyKey* row = io::find_study_key(path);
      INFO(path);
      REQUIRE(row != nullptr);
      written.insert(path);
      CHECK(std::string(row->default_text) == value_text(child.second));
    }
  }
  {
    // A study from records is resolved only once its records are fitted: its defaults are read
    // from the parsed settings instead.
    const Study st = parse(records_environment() + "name: example\n");
    const RecordsSettings& r = *st.scenarios.front().settings.environment.records;
    CHECK(std::string(io::find_study_key("environment.prior_concentration")->default_text) == fmt::format("{}", r.concentration));
    CHECK(std::string(io::find_study_key("environment.latent_states")->default_text) == (r.latent_states == 0 ? "auto" : ""));
    CHECK(std::string(io::find_study_key("environment.codebook")->default_text) == (r.codebook.empty() ? "none" : ""));
    CHECK(std::string(io::find_study_key("environment.draws")->allowed).find("default 16 with `data`") != std::string::npos);
    CHECK(st.scenarios.front().settings.environment.draws == 16);
    for (const char* k : {"environment.prior_concentration", "environment.latent_states"}) written.insert(k);
  }
  // Rows without a default value in the resolved study: sections, the given model, return_gap's target.
  for (const io::StudyKey& k : io::study_keys()) {
    if (k.type == "section" || written.count(std::string(k.path))) continue;
    INFO(k.path);
    CHECK((k.default_text == "none" || k.path == "sweep"));
  }
}

TEST_CASE("the table's whole-number limits are the validator's", "[study_keys]") {
  int checked = 0;
  for (const io::StudyKey& k : io::study_keys()) {
    if (k.type != "whole number") continue;
    const std::string allowed(k.allowed);
    const std::size_t dots = allowed.find(" .. ");
    REQUIRE(dots != std::string::npos);
    const std::string low = limit_text(allowed.substr(0, dots));
    std::string high = allowed.substr(dots + 4);
    high = limit_text(high.substr(0, high.find_first_of(" ;")));
    const std::string path(k.path);
    INFO(path << " allowed " << allowed);
    CHECK_NOTHROW(parse(study_with(path, low)));
    CHECK_NOTHROW(parse(study_with(path, high)));
    const std::string below = low == "0" ? "-1" : std::to_string(std::stoull(low) - 1);
    const std::string above = high == "18446744073709551615" ? "18446744073709551616" : std::to_string(std::stoull(high) + 1);
    CHECK(error_of([&] { parse(study_with(path, below)); }).key == path);
    CHECK(error_of([&] { parse(study_with(path, above)); }).key == path);
    ++checked;
  }
  CHECK(checked >= 15);
}

TEST_CASE("the table's number ranges are the validator's", "[study_keys]") {
  // "in [a, b]", "in (a, b]", ..., "greater than a", "at least a": each end accepted or refused
  // as its bracket says, and a value just outside refused.
  int checked = 0;
  for (const io::StudyKey& k : io::study_keys()) {
    if (k.type != "number") continue;
    const std::string path(k.path);
    std::string allowed(k.allowed);
    allowed = allowed.substr(0, allowed.find(';'));
    INFO(path << " allowed " << allowed);
    const std::string prefix = path.rfind("targets.", 0) == 0 ? "measures: [model_kl, return_gap]\n" : "";
    const auto ok = [&](double x) {
      std::ostringstream v;
      v.precision(17);
      v << x;
      try {
        parse(prefix + study_with(path, v.str()));
        return true;
      } catch (const io::InputError& e) {
        CHECK(e.key == path);
        return false;
      }
    };
    if (allowed.rfind("greater than ", 0) == 0) {
      const double a = std::stod(allowed.substr(13));
      CHECK_FALSE(ok(a));
      CHECK(ok(a + 1e-9));
    } else if (allowed.rfind("at least ", 0) == 0) {
      const double a = std::stod(allowed.substr(9));
      CHECK(ok(a));
      CHECK_FALSE(ok(a - 1e-9));
    } else {
      REQUIRE(allowed.rfind("in ", 0) == 0);
      const char open = allowed[3];
      const char close = allowed.back();
      const std::size_t comma = allowed.find(',');
      const double a = std::stod(allowed.substr(4, comma - 4));
      const double b = std::stod(allowed.substr(comma + 1, allowed.size() - comma - 2));
      CHECK(ok(a) == (open == '['));
      CHECK(ok(b) == (close == ']'));
      CHECK_FALSE(ok(a - 1e-9 * (1 + std::abs(a))));
      CHECK_FALSE(ok(b + 1e-9 * (1 + std::abs(b))));
    }
    ++checked;
  }
  CHECK(checked >= 10);
}

TEST_CASE("the study-file reference lists every key and is the committed docs/study-file.md", "[study_keys]") {
  const std::string page = io::study_file_reference();
  for (const io::StudyKey& k : io::study_keys()) {
    INFO(k.path);
    const std::string path(k.path);
    CHECK(page.find(k.type == "section" ? "\n## `" + path + "`\n" : "\n| `" + path + "` |") != std::string::npos);
  }
  // Regenerate with: build/dobudget reference study-file > docs/study-file.md
  CHECK(source_file("docs/study-file.md") == page);
}

TEST_CASE("the reference's example is a valid study", "[study_keys]") {
  const std::string page = io::study_file_reference();
  const std::size_t start = page.find("```yaml\n");
  REQUIRE(start != std::string::npos);
  const std::size_t end = page.find("```\n", start + 8);
  const Study study = parse(page.substr(start + 8, end - start - 8));
  CHECK(study.scenarios.size() == 2);
}
