// Mistakes in the user's input files (study files, model files), located for the user, and the
// small toolkit the readers use to find and phrase them.
//
// An InputError names the file, the 1-based line, the key path of the offending value and what
// is wrong:   study.yaml:7: budgets.pilot[2]: must be larger than the previous budget (30), got 20
// The command line prints what() and exits with code 2.
//
// Key paths join mapping keys with '.' and sequence indices with "[i]" (0-based), starting at the
// top of the file: "environment.states", "budgets.pilot[2]", "transitions[1][0][2]". A value that
// came from a sweep is named by its sweep entry: "sweep.logging.privilege[1]".
//
// The second half of this header (namespace dobudget::io::input) is the shared reading toolkit of
// study_file.cpp and model_file.cpp: checked access to yaml-cpp nodes that throws InputError with
// the node's own line (yaml-cpp's Mark), and the "did you mean" suggestion for unknown names.
#pragma once
#include <yaml-cpp/yaml.h>

#include <algorithm>
#include <charconv>
#include <cmath>
#include <cstddef>
#include <cstdint>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <limits>
#include <optional>
#include <stdexcept>
#include <string>
#include <string_view>
#include <system_error>
#include <utility>
#include <vector>

namespace dobudget::io {

struct InputError : std::runtime_error {
  // line: 1-based, 0 when unknown (e.g. the file cannot be read). key: empty when no key applies
  // (e.g. malformed YAML).
  InputError(std::string file_, int line_, std::string key_, std::string message_)
      : std::runtime_error(format(file_, line_, key_, message_)),
        file(std::move(file_)),
        line(line_),
        key(std::move(key_)),
        message(std::move(message_)) {}

  std::string file;
  int line = 0;
  std::string key;
  std::string message;

  // "FILE:LINE: KEY: MESSAGE"; the ":LINE" part is left out when the line is unknown (0) and the
  // " KEY:" part when there is no key.
  static std::string format(const std::string& file, int line, const std::string& key, const std::string& message) {
    std::string s = file;
    if (line > 0) s += ":" + std::to_string(line);
    s += ": ";
    if (!key.empty()) s += key + ": ";
    return s + message;
  }
};

namespace input {

// ---- Suggestions ---------------------------------------------------------------------------------

// Levenshtein distance (unit cost insertions, deletions and substitutions).
inline std::size_t edit_distance(std::string_view a, std::string_view b) {
  std::vector<std::size_t> row(b.size() + 1);
  for (std::size_t j = 0; j <= b.size(); ++j) row[j] = j;
  for (std::size_t i = 1; i <= a.size(); ++i) {
    std::size_t diagonal = row[0];
    row[0] = i;
    for (std::size_t j = 1; j <= b.size(); ++j) {
      const std::size_t up = row[j];
      row[j] = std::min({row[j] + 1, row[j - 1] + 1, diagonal + (a[i - 1] == b[j - 1] ? 0 : 1)});
      diagonal = up;
    }
  }
  return row[b.size()];
}

// The candidate closest to `word` by edit distance, if that distance is at most
// max(2, |word| / 3); ties go to the earlier candidate.
inline std::optional<std::string> closest_match(std::string_view word, const std::vector<std::string>& candidates) {
  const std::size_t limit = std::max<std::size_t>(2, word.size() / 3);
  std::optional<std::string> best;
  std::size_t best_distance = limit + 1;
  for (const std::string& c : candidates) {
    const std::size_t d = edit_distance(word, c);
    if (d < best_distance) best_distance = d, best = c;
  }
  return best;
}

inline std::string join(const std::vector<std::string>& items, std::string_view separator = ", ") {
  std::string s;
  for (std::size_t i = 0; i < items.size(); ++i) s += (i ? std::string(separator) : std::string()) + items[i];
  return s;
}

// "unknown WHAT 'word'; did you mean 'x'?" or, when nothing is close, "...; expected one of: a, b".
inline std::string unknown_name(std::string_view what, std::string_view word, const std::vector<std::string>& candidates) {
  std::string s = "unknown " + std::string(what) + " '" + std::string(word) + "'";
  if (auto m = closest_match(word, candidates)) return s + "; did you mean '" + *m + "'?";
  return s + "; expected one of: " + join(candidates);
}

// ---- Located values -----------------------------------------------------------------------------

// A value in an input file together with what messages about it must say.
struct Located {
  YAML::Node node;
  std::string key;  // key path, e.g. "budgets.pilot[2]"
  int line = 0;     // 1-based line of the value (of its key when the value is empty), 0 if unknown
};

// 1-based line of a node, 0 when unknown.
inline int line_of(const YAML::Node& node) {
  if (!node.IsDefined()) return 0;
  const YAML::Mark mark = node.Mark();
  return mark.line >= 0 ? mark.line + 1 : 0;
}

inline std::string child_key(const std::string& parent, std::string_view name) {
  return parent.empty() ? std::string(name) : parent + "." + std::string(name);
}

// "'four'", "a list", "a mapping", "nothing": what was found instead of what was expected.
inline std::string describe(const YAML::Node& node) {
  if (!node.IsDefined() || node.IsNull()) return "nothing";
  if (node.IsSequence()) return "a list";
  if (node.IsMap()) return "a mapping";
  const std::string& s = node.Scalar();
  return "'" + (s.size() <= 40 ? s : s.substr(0, 37) + "...") + "'";
}

// A mapping entry: its key as written and its value.
struct Entry {
  std::string name;
  int key_line = 0;
  Located value;
};

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
                             const std::vector<std::pair<std::string, std::string>>& hints = {}) const {
    std::vector<Entry> out;
    if (!map.node.IsDefined() || map.node.IsNull()) return out;
    if (!map.node.IsMap()) fail(map, "expected a mapping of 'key: value' entries, got " + describe(map.node));
    for (const auto& pair : map.node) {  // by value: yaml-cpp's iterators hand out temporaries
      const YAML::Node k = pair.first;
      const YAML::Node v = pair.second;
      const int key_line = line_of(k);
      if (!k.IsScalar()) fail(key_line, map.key, "keys must be plain names, got " + describe(k));
      const std::string name = k.Scalar();
      const std::string path = child_key(map.key, name);
      if (std::find(allowed.begin(), allowed.end(), name) == allowed.end()) {
        for (const auto& [hinted, text] : hints)
          if (hinted == name) fail(key_line, path, text);
        fail(key_line, path, unknown_name("key", name, allowed));
      }
      for (const Entry& e : out)
        if (e.name == name) fail(key_line, path, "is given twice (first on line " + std::to_string(e.key_line) + ")");
      const bool empty = !v.IsDefined() || v.IsNull();
      out.push_back(Entry{name, key_line, Located{v, path, empty ? key_line : line_of(v)}});
    }
    return out;
  }

  // The elements of a list, each located as "key[i]".
  std::vector<Located> items(const Located& list) const {
    if (!list.node.IsSequence()) fail(list, "expected a list, got " + describe(list.node));
    std::vector<Located> out;
    std::size_t i = 0;
    for (const auto& v : list.node) {  // each element is handed out by value
      const bool empty = !v.IsDefined() || v.IsNull();
      out.push_back(Located{v, list.key + "[" + std::to_string(i) + "]", empty ? list.line : line_of(v)});
      ++i;
    }
    return out;
  }

  // Any scalar, as written.
  std::string text(const Located& v) const {
    if (!v.node.IsScalar()) fail(v, "expected a single value, got " + describe(v.node));
    return v.node.Scalar();
  }

  // A finite number ("0.5", "1e-6", "+2", "3").
  double number(const Located& v) const {
    if (!v.node.IsScalar()) fail(v, "expected a number, got " + describe(v.node));
    const std::optional<double> x = parse_double(v.node.Scalar());
    if (!x) fail(v, "expected a number, got " + describe(v.node));
    if (!std::isfinite(*x)) fail(v, "expected a finite number, got " + describe(v.node));
    return *x;
  }

  // A whole number. Integer literals are read exactly; a number literal with an integral value
  // ("1e3", "4.0") is accepted too.
  long long whole(const Located& v) const {
    constexpr const char* expected = "expected a whole number, got ";
    if (!v.node.IsScalar()) fail(v, expected + describe(v.node));
    std::string_view s = v.node.Scalar();
    if (!s.empty() && s.front() == '+') s.remove_prefix(1);
    long long x = 0;
    const auto [end, ec] = std::from_chars(s.data(), s.data() + s.size(), x);
    if (ec == std::errc() && end == s.data() + s.size()) return x;
    if (ec == std::errc::result_out_of_range) fail(v, "is too large a number: " + describe(v.node));
    const std::optional<double> d = parse_double(v.node.Scalar());
    if (d && std::isfinite(*d) && std::floor(*d) == *d && std::abs(*d) <= 9007199254740992.0)
      return static_cast<long long>(*d);
    fail(v, expected + describe(v.node));
  }

  // A whole number that must fit an int and be at least `min`.
  int whole_int(const Located& v, int min) const {
    const long long x = whole(v);
    if (x < min) fail(v, "must be at least " + std::to_string(min) + ", got " + std::to_string(x));
    if (x > std::numeric_limits<int>::max())
      fail(v, "must be at most " + std::to_string(std::numeric_limits<int>::max()) + ", got " + std::to_string(x));
    return static_cast<int>(x);
  }

  // A whole number from 0 to 2^64 - 1 (seeds).
  std::uint64_t unsigned_whole(const Located& v) const {
    const std::string expected = "expected a whole number from 0 to " +
                                 std::to_string(std::numeric_limits<std::uint64_t>::max()) + ", got ";
    if (!v.node.IsScalar()) fail(v, expected + describe(v.node));
    std::string_view s = v.node.Scalar();
    if (!s.empty() && s.front() == '+') s.remove_prefix(1);
    std::uint64_t x = 0;
    const auto [end, ec] = std::from_chars(s.data(), s.data() + s.size(), x);
    if (ec == std::errc() && end == s.data() + s.size()) return x;
    const long long y = whole(v);  // integral number literals; negative ones are refused below
    if (y < 0) fail(v, expected + describe(v.node));
    return static_cast<std::uint64_t>(y);
  }

  // The whole text as a double (optional leading '+'); nullopt when it is not a number.
  static std::optional<double> parse_double(std::string_view s) {
    if (!s.empty() && s.front() == '+') s.remove_prefix(1);
    if (s.empty() || s.front() == '+') return std::nullopt;
    double x = 0;
    const auto [end, ec] = std::from_chars(s.data(), s.data() + s.size(), x);
    if (ec != std::errc() || end != s.data() + s.size()) return std::nullopt;
    return x;
  }

 private:
  std::string file_;
};

// ---- Files -------------------------------------------------------------------------------------

// The whole content of an input file; InputError (line 0) when it cannot be read.
// `what` names the kind of file in the message, e.g. "study file".
inline std::string read_file_text(const std::filesystem::path& file, std::string_view what) {
  std::error_code ec;
  const auto status = std::filesystem::status(file, ec);
  std::string problem;
  if (!std::filesystem::exists(status)) problem = "no such file";
  else if (std::filesystem::is_directory(status)) problem = "is a directory";
  std::ifstream in;
  if (problem.empty()) {
    in.open(file, std::ios::binary);
    if (!in) problem = "cannot be opened for reading";
  }
  if (!problem.empty()) throw InputError(file.string(), 0, "", "cannot read the " + std::string(what) + ": " + problem);
  return std::string(std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>());
}

// Parses YAML text holding one document (none counts as an empty one); malformed YAML becomes an
// InputError at the line yaml-cpp reports.
inline YAML::Node parse_yaml(const std::string& text, const std::string& file) {
  std::vector<YAML::Node> documents;
  try {
    documents = YAML::LoadAll(text);
  } catch (const YAML::Exception& e) {
    throw InputError(file, e.mark.line >= 0 ? e.mark.line + 1 : 0, "", "malformed YAML: " + e.msg);
  }
  if (documents.size() > 1)
    throw InputError(file, line_of(documents[1]), "",
                     "holds " + std::to_string(documents.size()) + " YAML documents (separated by '---'); expected one");
  return documents.empty() ? YAML::Node() : documents.front();
}

}  // namespace input
}  // namespace dobudget::io
