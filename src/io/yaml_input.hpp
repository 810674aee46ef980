// The reading toolkit shared by study_file.cpp and model_file.cpp: checked access to yaml-cpp
// nodes that throws InputError (input_error.hpp) with the node's own line (yaml-cpp's Mark) and
// key path, and the "did you mean" suggestion for unknown names.
#pragma once
#include <yaml-cpp/yaml.h>

#include <cstddef>
#include <cstdint>
#include <filesystem>
#include <optional>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "io/input_error.hpp"

namespace dobudget::io::input {

// ---- Suggestions ---------------------------------------------------------------------------------

// Levenshtein distance (unit cost insertions, deletions and substitutions).
std::size_t edit_distance(std::string_view a, std::string_view b);

// The candidate closest to `word` by edit distance, if that distance is at most
// max(2, |word| / 3); ties go to the earlier candidate.
std::optional<std::string> closest_match(std::string_view word, const std::vector<std::string>& candidates);

std::string join(const std::vector<std::string>& items, std::string_view separator = ", ");

// "unknown WHAT 'word'; did you mean 'x'?" or, when nothing is close, "...; expected one of: a, b".
std::string unknown_name(std::string_view what, std::string_view word, const std::vector<std::string>& candidates);

// ---- Located values -----------------------------------------------------------------------------

// A value in an input file together with what messages about it must say.
struct Located {
  YAML::Node node;
  std::string key;  // key path, e.g. "budgets.pilot[2]"
  int line = 0;     // 1-based line of the value (of its key when the value is empty), 0 if unknown
};

// 1-based line of a node, 0 when unknown.
int line_of(const YAML::Node& node);

// "parent.name", or "name" at the top ("" parent).
std::string child_key(const std::string& parent, std::string_view name);

// "'four'", "a list", "a mapping", "nothing": what was found instead of what was expected.
std::string describe(const YAML::Node& node);

// A mapping entry: its key as written and its value.
struct Entry {
  std::string name;
  int key_line = 0;
  Located value;
};

// The value of the entry named `name`, or nullptr when there is none.
const Located* find_entry(const std::vector<Entry>& entries, std::string_view name);

// Checked reading of the nodes of one file: every failure is an InputError naming that file.
class Reader {
 public:
  explicit Reader(std::string file) : file_(std::move(file)) {}
  const std::string& file() const { return file_; }

  [[noreturn]] void fail(int line, const std::string& key, const std::string& message) const {
    throw InputError(file_, line, key, message);
  }
  [[noreturn]] void fail(const Located& at, const std::string& message) const { fail(at.line, at.key, message); }

  // The entries of a mapping in the order written, after checking that the value is a mapping
  // (an empty value counts as an empty mapping), that every key is a plain name listed in
  // `allowed` (unknown keys are refused with the closest valid key as a suggestion, or with the
  // text given for them in `hints`) and that no key is given twice.
  std::vector<Entry> entries(const Located& map, const std::vector<std::string>& allowed,
                             const std::vector<std::pair<std::string, std::string>>& hints = {}) const;

  // The elements of a list, each located as "key[i]".
  std::vector<Located> items(const Located& list) const;

  // Any scalar, as written.
  std::string text(const Located& v) const;

  // A finite number ("0.5", "1e-6", "+2", "3").
  double number(const Located& v) const;

  // A whole number. Integer literals are read exactly; a number literal with an integral value
  // ("1e3", "4.0") is accepted too.
  long long whole(const Located& v) const;

  // A whole number that must fit an int and be at least `min`.
  int whole_int(const Located& v, int min) const;

  // A whole number from 0 to 2^64 - 1 (seeds).
  std::uint64_t unsigned_whole(const Located& v) const;

  // The whole text as a double (optional leading '+'); nullopt when it is not a number.
  static std::optional<double> parse_double(std::string_view s);

 private:
  std::string file_;
};

// ---- Files -------------------------------------------------------------------------------------

// The most bytes an input file may hold: 64 MiB, room for a model of a few hundred states written
// out in full, and a bound on what a hostile file can make us read and parse.
inline constexpr std::size_t max_input_bytes = std::size_t{64} << 20;

// The whole content of an input file; InputError (line 0) when it cannot be read, is not a
// regular file (a device such as /dev/zero, a pipe) or is larger than max_input_bytes.
// `what` names the kind of file in the message, e.g. "study file".
std::string read_file_text(const std::filesystem::path& file, std::string_view what);

// Parses YAML text holding one document (none counts as an empty one); malformed YAML becomes an
// InputError at the line yaml-cpp reports.
// yaml-cpp keeps about 470 bytes per node (measured while fuzzing: a flow list of 10^6 numbers,
// 2 MB of text, took 468 MB), so a 64 MiB file of short scalars could take some 15 GB before any
// limit of ours applies. A pre-scan of the events counts the nodes first: at most 10^7 (about 5 GB),
// room for a model of 200 states and 200 actions written out in full (8 x 10^6 probabilities).
inline constexpr std::size_t max_yaml_nodes = 10000000;

YAML::Node parse_yaml(const std::string& text, const std::string& file, std::size_t max_nodes = max_yaml_nodes);

}  // namespace dobudget::io::input
