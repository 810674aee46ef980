// The documentation stays inside the repository: every Markdown link in README.md, DEVELOPERS.md,
// docs/ and studies/ names a file of the repository (and, with #anchor, a heading of that file), and
// none leaves it (no absolute path, no "../" above the root, no URL). Anchors are GitHub's: the
// heading in lower case, spaces as '-', punctuation other than '-' and '_' dropped (common practice).
#include <catch2/catch.hpp>

#include <cctype>
#include <filesystem>
#include <fstream>
#include <regex>
#include <set>
#include <sstream>
#include <string>
#include <vector>

namespace fs = std::filesystem;

namespace {

const fs::path root = fs::path(DOBUDGET_SOURCE_DIR);

std::string read(const fs::path& f) {
  std::ifstream in(f, std::ios::binary);
  std::ostringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

std::vector<fs::path> markdown_files() {
  std::vector<fs::path> out{root / "README.md", root / "DEVELOPERS.md"};
  for (const char* dir : {"docs", "studies"})
    for (const auto& e : fs::recursive_directory_iterator(root / dir))
      if (e.is_regular_file() && e.path().extension() == ".md") out.push_back(e.path());
  return out;
}

// The text with fenced code blocks and inline code spans removed.
std::string without_code(const std::string& text) {
  std::string out;
  std::istringstream in(text);
  std::string line;
  bool fenced = false;
  while (std::getline(in, line)) {
    if (line.rfind("```", 0) == 0) {
      fenced = !fenced;
      continue;
    }
    if (fenced) continue;
    bool span = false;
    for (char c : line) {
      if (c == '`') span = !span;
      else if (!span) out += c;
    }
    out += '\n';
  }
  return out;
}

std::string anchor_of(const std::string& heading) {
  std::string out;
  for (unsigned char c : heading) {
    if (std::isalnum(c)) out += static_cast<char>(std::tolower(c));
    else if (c == ' ' || c == '-') out += '-';
    else if (c == '_') out += '_';
  }
  return out;
}

std::set<std::string> anchors(const fs::path& f) {
  std::set<std::string> out;
  std::istringstream in(read(f));
  std::string line;
  bool code = false;
  while (std::getline(in, line)) {
    if (line.rfind("```", 0) == 0) code = !code;
    if (code || line.empty() || line[0] != '#') continue;
    const std::size_t text = line.find_first_not_of('#');
    if (text == std::string::npos) continue;
    out.insert(anchor_of(line.substr(line.find_first_not_of(' ', text))));
  }
  return out;
}

}  // namespace

TEST_CASE("documentation links name files and headings inside the repository", "[docs]") {
  const std::regex link(R"(\]\(([^)\s]+)\))");
  int links = 0;
  for (const fs::path& file : markdown_files()) {
    // Code is not a link: fenced blocks and inline code spans are left out (T[a](s, s') is maths).
    const std::string text = without_code(read(file));
    for (auto it = std::sregex_iterator(text.begin(), text.end(), link); it != std::sregex_iterator(); ++it) {
      const std::string target = (*it)[1];
      INFO(file.string() << ": " << target);
      CHECK(target.find("://") == std::string::npos);
      CHECK(target.front() != '/');
      const std::size_t hash = target.find('#');
      const std::string path = target.substr(0, hash);
      const fs::path resolved = path.empty() ? file : fs::weakly_canonical(file.parent_path() / path);
      const std::string relative = fs::relative(resolved, fs::canonical(root)).string();
      CHECK(relative.rfind("..", 0) != 0);
      CHECK(fs::exists(resolved));
      if (hash != std::string::npos && fs::is_regular_file(resolved))
        CHECK(anchors(resolved).count(target.substr(hash + 1)) == 1);
      ++links;
    }
  }
  CHECK(links >= 20);
}

TEST_CASE("the documentation pages exist and README and DEVELOPERS.md link to each", "[docs]") {
  const std::string readme = read(root / "README.md");
  const std::string developers = read(root / "DEVELOPERS.md");
  for (const char* page : {"docs/design.md", "docs/study-file.md", "docs/model-file.md", "docs/run-directory.md",
                           "docs/clusters.md"}) {
    INFO(page);
    CHECK(fs::is_regular_file(root / page));
    CHECK(readme.find(std::string("(") + page + ")") != std::string::npos);
    CHECK(developers.find(std::string("(") + page + ")") != std::string::npos);
  }
}

TEST_CASE("no file cites the design notes that lived outside the repository", "[docs]") {
  // Sources cite docs/ pages by section (docs/design.md, "Strategies"); the old form named sections
  // of a file outside the repository. Built from parts so that this file does not match itself.
  const std::vector<std::string> outside{std::string("design.md") + " sec.", std::string("shared/") + "design.md"};
  int files = 0;
  for (const char* dir : {"src", "tests", "bench", "configs", "studies", "docs"}) {
    for (const auto& e : fs::recursive_directory_iterator(root / dir)) {
      if (!e.is_regular_file()) continue;
      const std::string text = read(e.path());
      for (const std::string& s : outside) {
        INFO(e.path().string() << " mentions " << s);
        CHECK(text.find(s) == std::string::npos);
      }
      ++files;
    }
  }
  for (const char* f : {"README.md", "DEVELOPERS.md", "CMakeLists.txt"}) {
    const std::string text = read(root / f);
    for (const std::string& s : outside) {
      INFO(f << " mentions " << s);
      CHECK(text.find(s) == std::string::npos);
    }
  }
  CHECK(files > 100);
}
