#include "io/yaml_input.hpp"

#include <yaml-cpp/depthguard.h>

#include <yaml-cpp/eventhandler.h>

#include <algorithm>
#include <charconv>
#include <cmath>
#include <fstream>
#include <iterator>
#include <limits>
#include <sstream>
#include <system_error>

namespace dobudget::io::input {
namespace {

// The whole text as an integer of type T (optional leading '+'). std::errc() on success;
// result_out_of_range when the digits name a number T cannot hold; invalid_argument otherwise
// (including text left over after the digits).
template <class T>
std::errc parse_integer(std::string_view s, T& x) {
  if (!s.empty() && s.front() == '+') s.remove_prefix(1);
  const auto [end, ec] = std::from_chars(s.data(), s.data() + s.size(), x);
  if (ec == std::errc() && end != s.data() + s.size()) return std::errc::invalid_argument;
  return ec;
}

}  // namespace

// ---- Suggestions ---------------------------------------------------------------------------------

std::size_t edit_distance(std::string_view a, std::string_view b) {
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

std::optional<std::string> closest_match(std::string_view word, const std::vector<std::string>& candidates) {
  const std::size_t limit = std::max<std::size_t>(2, word.size() / 3);
  std::optional<std::string> best;
  std::size_t best_distance = limit + 1;
  for (const std::string& c : candidates) {
    const std::size_t d = edit_distance(word, c);
    if (d < best_distance) best_distance = d, best = c;
  }
  return best;
}

std::string join(const std::vector<std::string>& items, std::string_view separator) {
  std::string s;
  for (std::size_t i = 0; i < items.size(); ++i) s += (i ? std::string(separator) : std::string()) + items[i];
  return s;
}

std::string unknown_name(std::string_view what, std::string_view word, const std::vector<std::string>& candidates) {
  std::string s = "unknown " + std::string(what) + " '" + std::string(word) + "'";
  if (auto m = closest_match(word, candidates)) return s + "; did you mean '" + *m + "'?";
  return s + "; expected one of: " + join(candidates);
}

// ---- Located values -----------------------------------------------------------------------------

int line_of(const YAML::Node& node) {
  if (!node.IsDefined()) return 0;
  const YAML::Mark mark = node.Mark();
  return mark.line >= 0 ? mark.line + 1 : 0;
}

std::string child_key(const std::string& parent, std::string_view name) {
  return parent.empty() ? std::string(name) : parent + "." + std::string(name);
}

std::string describe(const YAML::Node& node) {
  if (!node.IsDefined() || node.IsNull()) return "nothing";
  if (node.IsSequence()) return "a list";
  if (node.IsMap()) return "a mapping";
  const std::string& s = node.Scalar();
  return "'" + (s.size() <= 40 ? s : s.substr(0, 37) + "...") + "'";
}

const Located* find_entry(const std::vector<Entry>& entries, std::string_view name) {
  for (const Entry& e : entries)
    if (e.name == name) return &e.value;
  return nullptr;
}

std::vector<Entry> Reader::entries(const Located& map, const std::vector<std::string>& allowed,
                                   const std::vector<std::pair<std::string, std::string>>& hints) const {
  std::vector<Entry> out;
  if (!map.node.IsDefined() || map.node.IsNull()) return out;
  if (!map.node.IsMap()) fail(map, "expected a mapping of 'key: value' entries, got " + describe(map.node));
  // yaml-cpp's iterators hand out each key/value pair as a temporary: bind it, do not copy it.
  for (const auto& pair : map.node) {
    const YAML::Node& k = pair.first;
    const YAML::Node& v = pair.second;
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

std::vector<Located> Reader::items(const Located& list) const {
  if (!list.node.IsSequence()) fail(list, "expected a list, got " + describe(list.node));
  std::vector<Located> out;
  std::size_t i = 0;
  for (const auto& v : list.node) {  // each element is handed out as a temporary, bound here
    const bool empty = !v.IsDefined() || v.IsNull();
    out.push_back(Located{v, list.key + "[" + std::to_string(i) + "]", empty ? list.line : line_of(v)});
    ++i;
  }
  return out;
}

std::string Reader::text(const Located& v) const {
  if (!v.node.IsScalar()) fail(v, "expected a single value, got " + describe(v.node));
  return v.node.Scalar();
}

double Reader::number(const Located& v) const {
  if (!v.node.IsScalar()) fail(v, "expected a number, got " + describe(v.node));
  const std::optional<double> x = parse_double(v.node.Scalar());
  if (!x) fail(v, "expected a number, got " + describe(v.node));
  if (!std::isfinite(*x)) fail(v, "expected a finite number, got " + describe(v.node));
  return *x;
}

long long Reader::whole(const Located& v) const {
  constexpr const char* expected = "expected a whole number, got ";
  if (!v.node.IsScalar()) fail(v, expected + describe(v.node));
  long long x = 0;
  const std::errc ec = parse_integer(v.node.Scalar(), x);
  if (ec == std::errc()) return x;
  if (ec == std::errc::result_out_of_range) fail(v, "is too large a number: " + describe(v.node));
  const std::optional<double> d = parse_double(v.node.Scalar());
  if (d && std::isfinite(*d) && std::floor(*d) == *d && std::abs(*d) <= 9007199254740992.0)
    return static_cast<long long>(*d);
  fail(v, expected + describe(v.node));
}

int Reader::whole_int(const Located& v, int min) const {
  const long long x = whole(v);
  if (x < min) fail(v, "must be at least " + std::to_string(min) + ", got " + std::to_string(x));
  if (x > std::numeric_limits<int>::max())
    fail(v, "must be at most " + std::to_string(std::numeric_limits<int>::max()) + ", got " + std::to_string(x));
  return static_cast<int>(x);
}

std::uint64_t Reader::unsigned_whole(const Located& v) const {
  const std::string expected =
      "expected a whole number from 0 to " + std::to_string(std::numeric_limits<std::uint64_t>::max()) + ", got ";
  if (!v.node.IsScalar()) fail(v, expected + describe(v.node));
  std::uint64_t x = 0;
  if (parse_integer(v.node.Scalar(), x) == std::errc()) return x;
  const long long y = whole(v);  // integral number literals; negative ones are refused below
  if (y < 0) fail(v, expected + describe(v.node));
  return static_cast<std::uint64_t>(y);
}

std::optional<double> Reader::parse_double(std::string_view s) {
  if (!s.empty() && s.front() == '+') s.remove_prefix(1);
  if (s.empty() || s.front() == '+') return std::nullopt;
  double x = 0;
  const auto [end, ec] = std::from_chars(s.data(), s.data() + s.size(), x);
  if (ec != std::errc() || end != s.data() + s.size()) return std::nullopt;
  return x;
}

// ---- Files -------------------------------------------------------------------------------------

std::string read_file_text(const std::filesystem::path& file, std::string_view what) {
  std::error_code ec;
  const auto status = std::filesystem::status(file, ec);
  std::string problem;
  if (!std::filesystem::exists(status)) problem = "no such file";
  else if (std::filesystem::is_directory(status)) problem = "is a directory";
  else if (!std::filesystem::is_regular_file(status))
    problem = "not a regular file (a device, pipe or socket cannot be read as one)";
  std::ifstream in;
  if (problem.empty()) {
    in.open(file, std::ios::binary);
    if (!in) problem = "cannot be opened for reading";
  }
  if (!problem.empty()) throw InputError(file.string(), 0, "", "cannot read the " + std::string(what) + ": " + problem);
  // The size is checked before anything is allocated; a file that grows while it is read is cut
  // at max_input_bytes + 1 bytes and refused the same way.
  const auto too_large = [&] {
    return InputError(file.string(), 0, "",
                      "the " + std::string(what) + " is larger than " + std::to_string(max_input_bytes >> 20) +
                          " MiB; no study or model file needs that much");
  };
  const std::uintmax_t size = std::filesystem::file_size(file, ec);
  if (ec || size > max_input_bytes) {
    if (ec) throw InputError(file.string(), 0, "", "cannot read the " + std::string(what) + ": " + ec.message());
    throw too_large();
  }
  std::string text(static_cast<std::size_t>(size), '\0');
  in.read(text.data(), static_cast<std::streamsize>(text.size()));
  text.resize(static_cast<std::size_t>(in.gcount()));
  if (in && in.peek() != std::char_traits<char>::eof()) {
    for (char c = 0; text.size() <= max_input_bytes && in.get(c);) text += c;
    if (text.size() > max_input_bytes) throw too_large();
  }
  return text;
}

namespace {

// Where each document of a YAML stream starts, from yaml-cpp's event parser (no nodes are built).
// What the pre-scan sees: where each document starts, and how many nodes the text holds (at most
// max_nodes: yaml_input.hpp, max_yaml_nodes).
struct DocumentStarts : YAML::EventHandler {
  DocumentStarts(const std::string& file, std::size_t max_nodes) : file_(file), max_nodes_(max_nodes) {}
  std::vector<YAML::Mark> starts;
  void OnDocumentStart(const YAML::Mark& mark) override { starts.push_back(mark); }
  void OnDocumentEnd() override {}
  void OnNull(const YAML::Mark& m, YAML::anchor_t) override { node(m); }
  void OnAlias(const YAML::Mark& m, YAML::anchor_t) override { node(m); }
  void OnScalar(const YAML::Mark& m, const std::string&, YAML::anchor_t, const std::string&) override { node(m); }
  void OnSequenceStart(const YAML::Mark& m, const std::string&, YAML::anchor_t, YAML::EmitterStyle::value) override {
    node(m);
  }
  void OnSequenceEnd() override {}
  void OnMapStart(const YAML::Mark& m, const std::string&, YAML::anchor_t, YAML::EmitterStyle::value) override {
    node(m);
  }
  void OnMapEnd() override {}

 private:
  void node(const YAML::Mark& m) {
    if (++nodes_ > max_nodes_)
      throw InputError(file_, m.line >= 0 ? m.line + 1 : 0, "",
                       "holds more than " + std::to_string(max_nodes_) +
                           " YAML values; no study or model file needs that many");
  }
  const std::string& file_;
  std::size_t max_nodes_ = 0, nodes_ = 0;
};

// yaml-cpp 0.7 (Debian 12) stops consuming a stream at some malformed tokens (a ',' outside any
// flow collection is one) and then hands out the same empty document forever: YAML::LoadAll loops,
// allocating about 0.5 GB a second (found by tests/fuzz; yaml-cpp issue 1040, fixed upstream by
// pull request 1319 in 2024). Each document must start past the one before; a document that starts
// where the previous one started is refused here, before YAML::LoadAll is called.
void check_documents_advance(const std::string& text, const std::string& file, std::size_t max_nodes) {
  std::istringstream stream(text);
  YAML::Parser parser(stream);
  DocumentStarts documents(file, max_nodes);
  while (parser.HandleNextDocument(documents)) {
    const std::size_t n = documents.starts.size();
    if (n >= 2 && documents.starts[n - 1].pos <= documents.starts[n - 2].pos) {
      const YAML::Mark& at = documents.starts[n - 1];
      const auto c = at.pos >= 0 && static_cast<std::size_t>(at.pos) < text.size()
                         ? static_cast<unsigned char>(text[static_cast<std::size_t>(at.pos)])
                         : 0;
      const std::string shown = c > 0x20 && c < 0x7f ? std::string("'") + static_cast<char>(c) + "'" : "text";
      throw InputError(file, at.line >= 0 ? at.line + 1 : 0, "",
                       "malformed YAML: unexpected " + shown + " where a value should start");
    }
  }
}

}  // namespace

YAML::Node parse_yaml(const std::string& text, const std::string& file, std::size_t max_nodes) {
  std::vector<YAML::Node> documents;
  try {
    check_documents_advance(text, file, max_nodes);
    documents = YAML::LoadAll(text);
  } catch (const YAML::DeepRecursion& e) {  // yaml-cpp's guard against unbounded recursion
    throw InputError(file, e.mark.line >= 0 ? e.mark.line + 1 : 0, "",
                     "malformed YAML: lists or mappings nested more than " + std::to_string(e.depth() - 1) +
                         " levels deep; no study or model file needs that");
  } catch (const YAML::Exception& e) {
    throw InputError(file, e.mark.line >= 0 ? e.mark.line + 1 : 0, "", "malformed YAML: " + e.msg);
  }
  if (documents.size() > 1)
    throw InputError(file, line_of(documents[1]), "",
                     "holds " + std::to_string(documents.size()) + " YAML documents (separated by '---'); expected one");
  return documents.empty() ? YAML::Node() : documents.front();
}

}  // namespace dobudget::io::input
