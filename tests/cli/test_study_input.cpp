// Hardening: study files travel between people. A study's name never chooses where files go, and
// inputs that are not studies (an empty file, a device, a directory) are refused with exit code 2
// and nothing written, instead of running defaults or hanging.
#include <catch2/catch.hpp>

#include <cstdio>
#include <string>
#include <vector>

#include "cli_harness.hpp"

using namespace cli_test;

namespace {

// Runs the binary with `dir` as the working directory (the default output folders are relative).
Result run_in(const std::filesystem::path& dir, const std::string& args) {
  return run_command("cd '" + dir.string() + "' && '" + std::string(DOBUDGET_BINARY) + "' " + args);
}

std::string files_below(const std::filesystem::path& dir) {
  std::string s;
  for (const auto& e : std::filesystem::recursive_directory_iterator(dir)) s += e.path().string() + "\n";
  return s;
}

}  // namespace

TEST_CASE("plan and draw: a name that looks like a path stays below runs/ and environments/", "[cli][hardening]") {
  Scratch s("name-path");
  const auto work = s / "a" / "b";
  std::filesystem::create_directories(work);
  for (const std::string name : {"../../escaped", "/tmp/dobudget-absolute-name", "x/../../y"}) {
    INFO(name);
    std::string study = tiny_study;
    study.replace(study.find("name: tiny"), 10, "name: \"" + name + "\"");
    write(work / "study.yaml", study);
    const Result p = run_in(work, "plan study.yaml --quiet");
    INFO(p.out);
    REQUIRE(p.code == 0);
    const Result d = run_in(work, "draw study.yaml");
    INFO(d.out);
    REQUIRE(d.code == 0);
    // Everything written is below work/runs and work/environments; nothing beside or above.
    for (const auto& e : std::filesystem::recursive_directory_iterator(s.dir)) {
      const std::string path = e.path().lexically_relative(work).string();
      if (e.path() == work / "study.yaml" || e.path() == s / "a" || e.path() == work) continue;
      INFO(e.path().string());
      CHECK((path.rfind("runs", 0) == 0 || path.rfind("environments", 0) == 0));
    }
    CHECK_FALSE(std::filesystem::exists("/tmp/dobudget-absolute-name"));
    std::filesystem::remove_all(work / "runs");
    std::filesystem::remove_all(work / "environments");
  }
}

TEST_CASE("plan, check, draw: a file holding no study is refused with exit 2 and nothing written", "[cli][hardening]") {
  Scratch s("empty-study");
  for (const std::string text : {"", "# only a comment\n", "---\n"}) {
    INFO("text: '" << text << "'");
    write(s / "empty.yaml", text);
    for (const std::string command : {"plan", "check", "draw"}) {
      const Result r = run_in(s.dir, command + " empty.yaml");
      INFO(command << ": " << r.out);
      CHECK(r.code == 2);
      CHECK(r.out.find("error: empty.yaml:") == 0);
      CHECK(r.out.find(": holds no study") != std::string::npos);
    }
  }
  CHECK(files_below(s.dir) == (s / "empty.yaml").string() + "\n");
}

TEST_CASE("plan and check refuse devices, pipes and directories as study files at once", "[cli][hardening]") {
  Scratch s("device");
  // /dev/zero never ends: it must be refused before reading, not read until memory runs out.
  for (const std::string& input : std::vector<std::string>{"/dev/zero", "/dev/null", s.dir.string()}) {
    for (const std::string command : {"plan", "check"}) {
      const Result r = run_command("cd '" + s.dir.string() + "' && timeout 20 '" + std::string(DOBUDGET_BINARY) + "' " +
                                   command + " " + input);
      INFO(command << " " << input << ": " << r.out);
      CHECK(r.code == 2);
      CHECK(r.out.find("cannot read the study file") != std::string::npos);
    }
  }
  CHECK(files_below(s.dir).empty());
}
