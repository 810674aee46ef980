// --help: each command's help shows that command's own examples and no other's; the list of every
// command's examples and the caution are on `dobudget --help` only. The commands are read from the
// main help's subcommand list, so a new command without examples fails here.
#include <catch2/catch.hpp>

#include <sstream>
#include <string>
#include <vector>

#include "cli_harness.hpp"

using cli_test::run;

namespace {

// The subcommand names that `dobudget --help` lists under "Subcommands:".
std::vector<std::string> listed_commands(const std::string& help) {
  std::vector<std::string> out;
  std::istringstream in(help);
  std::string line;
  bool in_list = false;
  while (std::getline(in, line)) {
    if (line.rfind("Subcommands:", 0) == 0) {
      in_list = true;
      continue;
    }
    if (!in_list) continue;
    if (line.empty() || line[0] != ' ') break;
    std::istringstream words(line);
    std::string name;
    words >> name;
    out.push_back(name);
  }
  return out;
}

// Example lines of a help text: those that start with "  dobudget ".
std::vector<std::string> example_lines(const std::string& help) {
  std::vector<std::string> out;
  std::istringstream in(help);
  std::string line;
  while (std::getline(in, line))
    if (line.rfind("  dobudget ", 0) == 0) out.push_back(line);
  return out;
}

}  // namespace

TEST_CASE("dobudget --help lists every command's examples and the caution", "[cli][help]") {
  const auto main_help = run("--help");
  REQUIRE(main_help.code == 0);
  const std::vector<std::string> commands = listed_commands(main_help.out);
  CHECK(commands.size() >= 6);
  CHECK(main_help.out.find("Caution:") != std::string::npos);
  CHECK(main_help.out.find("no substitute for a qualified statistician") != std::string::npos);
  CHECK(main_help.out.find("reference") == std::string::npos);  // the maintainers' command is hidden
  const std::vector<std::string> examples = example_lines(main_help.out);
  for (const std::string& c : commands) {
    INFO(c);
    bool found = false;
    for (const std::string& e : examples) found = found || e.rfind("  dobudget " + c + " ", 0) == 0;
    CHECK(found);
  }
}

TEST_CASE("each command's --help shows its own examples and not the others'", "[cli][help]") {
  const std::vector<std::string> commands = listed_commands(run("--help").out);
  REQUIRE(commands.size() >= 6);
  for (const std::string& c : commands) {
    INFO(c);
    const auto help = run(c + " --help");
    REQUIRE(help.code == 0);
    const std::vector<std::string> examples = example_lines(help.out);
    CHECK(help.out.find("Examples:") != std::string::npos);
    CHECK_FALSE(examples.empty());
    for (const std::string& e : examples) {
      INFO(e);
      CHECK(e.rfind("  dobudget " + c + " ", 0) == 0);
    }
    CHECK(help.out.find("Caution:") == std::string::npos);
  }
}
